use std::vec::Vec;

use super::frame::{FrameDecoder, MAX_FRAME, cobs_decode_in_place, crc16, encode, parse};
use super::*;
use crate::capture::Capture;
use crate::current_loop::{CurrentLoop, LoopConfig, TickInput};
use crate::output::DutyMapping;
use crate::pi::{OutputLimits, PiConfig};
use crate::sense::CurrentSense;
use crate::supervisor::{BusWindow, OvercurrentLimit, SupervisorConfig};

/// The link's view of an invented 24 V board, all in one thread: commands
/// wait in `queue` (four at most) until `tick` applies them, as the control
/// interrupt would.
struct TestBoard {
    cl: CurrentLoop,
    queue: Vec<Command>,
    capture: Capture<32>,
}

impl TestBoard {
    fn new() -> Self {
        let config = LoopConfig::new(
            CurrentSense::from_shunt(12, 3.3, 0.010, 20.0, 2048.0).unwrap(),
            SetpointLimits::new(-4.0, 4.0, 2000.0).unwrap(),
            SupervisorConfig::new(
                OvercurrentLimit::new(6.0, 3).unwrap(),
                BusWindow::new(18.0, 30.0).unwrap(),
            ),
            PiConfig::new(
                PiGains::from_kp_ti(3.0, 1.26e-3).unwrap(),
                50e-6,
                OutputLimits::symmetric(30.0).unwrap(),
            )
            .unwrap(),
            DutyMapping::new(0.95, 12.0).unwrap(),
        )
        .unwrap();
        Self {
            cl: CurrentLoop::new(config).unwrap(),
            queue: Vec::new(),
            capture: Capture::new(),
        }
    }

    fn tick(&mut self, counts: u16, bus_v: f32) {
        for c in self.queue.drain(..) {
            let _ = self.cl.apply(c);
        }
        let input = TickInput {
            current_counts: counts,
            bus_v,
            speed_rad_s: None,
        };
        self.cl.tick(&input);
        self.capture.record(&self.cl, &input);
    }
}

impl TestBoard {
    /// The main loop's view for the handler: the queue holds four commands.
    fn board(&mut self) -> LoopBoard<'_, 32, impl FnMut(Command) -> bool + '_> {
        let queue = &mut self.queue;
        LoopBoard {
            cl: &self.cl,
            capture: &mut self.capture,
            send: move |c| {
                if queue.len() >= 4 {
                    return false;
                }
                queue.push(c);
                true
            },
        }
    }
}

fn frame_of(request: &RequestFrame) -> Vec<u8> {
    let mut out = [0u8; MAX_FRAME];
    let n = encode(request, &mut out).unwrap();
    out[..n].to_vec()
}

/// Feeds `bytes` to the link; the replies, decoded.
fn feed(link: &mut Link, board: &mut TestBoard, bytes: &[u8]) -> Vec<ReplyFrame> {
    let mut replies = Vec::new();
    let mut decoder = FrameDecoder::new();
    for &b in bytes {
        if let Some(out) = link.receive(b, &mut board.board()) {
            let out = out.to_vec();
            for &o in &out {
                if let Some(payload) = decoder.push(o) {
                    replies.push(parse::<ReplyFrame>(payload.unwrap()).unwrap());
                }
            }
        }
    }
    replies
}

fn ask(link: &mut Link, board: &mut TestBoard, tag: u16, body: Request) -> Reply {
    let request = RequestFrame {
        version: VERSION,
        tag,
        body,
    };
    let replies = feed(link, board, &frame_of(&request));
    assert_eq!(replies.len(), 1);
    assert_eq!(replies[0].tag, tag);
    replies[0].body.clone()
}

#[test]
fn the_frame_check_is_crc16_ibm_3740() {
    // The check value of CRC-16/IBM-3740 (also called CRC-16/CCITT-FALSE)
    // over the ASCII digits "123456789": 0x29B1, from Greg Cook's "Catalogue
    // of parametrised CRC algorithms" (reveng.sourceforge.io).
    assert_eq!(crc16(b"123456789"), 0x29B1);
}

#[test]
fn cobs_matches_the_published_examples() {
    // Cheshire and Baker, "Consistent Overhead Byte Stuffing" (1999): each
    // zero becomes the distance to the next, a block of 254 non-zero bytes
    // takes the code 0xFF. The examples are the usual ones (from memory).
    let mut long = std::vec![0xFFu8];
    long.extend(1..=254u8);
    let cases: [(&[u8], &[u8]); 6] = [
        (&[0x00], &[0x01, 0x01]),
        (&[0x00, 0x00], &[0x01, 0x01, 0x01]),
        (&[0x11, 0x22, 0x00, 0x33], &[0x03, 0x11, 0x22, 0x02, 0x33]),
        (&[0x11, 0x22, 0x33, 0x44], &[0x05, 0x11, 0x22, 0x33, 0x44]),
        (&[0x11, 0x00, 0x00, 0x00], &[0x02, 0x11, 0x01, 0x01, 0x01]),
        (&(1..=254u8).collect::<Vec<_>>(), &long),
    ];
    for (raw, coded) in cases {
        let mut out = [0u8; 300];
        let n = cobs::try_encode(raw, &mut out).unwrap();
        assert_eq!(&out[..n], coded, "encoding {raw:02x?}");
        let mut buf = coded.to_vec();
        let m = cobs_decode_in_place(&mut buf).unwrap();
        assert_eq!(&buf[..m], raw, "decoding {coded:02x?}");
    }
    // A code that runs past the end, and a zero inside, are refused.
    assert_eq!(cobs_decode_in_place(&mut [0x05, 0x11]), None);
    assert_eq!(cobs_decode_in_place(&mut [0x03, 0x00, 0x11]), None);
}

#[test]
fn requests_get_their_answers() {
    let (mut link, mut board) = (Link::new(), TestBoard::new());
    let hello = ask(&mut link, &mut board, 1, Request::Hello);
    assert_eq!(
        hello,
        Reply::Hello {
            version: VERSION,
            capture_capacity: 32,
            period_s: 50e-6
        }
    );
    assert_eq!(ask(&mut link, &mut board, 2, Request::Enable), Reply::Queued);
    assert_eq!(
        ask(&mut link, &mut board, 3, Request::SetCurrent { current_a: 1.5 }),
        Reply::Queued
    );
    board.tick(2048, 24.0);
    let Reply::Status(s) = ask(&mut link, &mut board, 4, Request::Status) else {
        panic!("a status")
    };
    assert_eq!((s.state, s.latched, s.target_a), (1, 0, 1.5));
    assert!(s.duty > 0.0);
    assert_eq!(
        ask(&mut link, &mut board, 5, Request::ReadLimits),
        Reply::Limits {
            min_a: -4.0,
            max_a: 4.0,
            slew_a_per_s: 2000.0
        }
    );
    assert_eq!(
        ask(
            &mut link,
            &mut board,
            6,
            Request::WriteGains {
                kp_v_per_a: 2.0,
                ti_s: 1e-3,
                setpoint_weight: 0.5
            }
        ),
        Reply::Queued
    );
    board.tick(2048, 24.0);
    let Reply::Gains {
        kp_v_per_a,
        ti_s,
        setpoint_weight,
    } = ask(&mut link, &mut board, 7, Request::ReadGains)
    else {
        panic!("gains")
    };
    assert_eq!((kp_v_per_a, setpoint_weight), (2.0, 0.5));
    assert!((ti_s - 1e-3).abs() < 1e-9);
}

#[test]
fn refused_values_name_their_field_and_change_nothing() {
    let (mut link, mut board) = (Link::new(), TestBoard::new());
    let bad = Request::WriteGains {
        kp_v_per_a: -1.0,
        ti_s: 1e-3,
        setpoint_weight: 1.0,
    };
    let Reply::Refused(r) = ask(&mut link, &mut board, 9, bad) else {
        panic!("refused")
    };
    assert_eq!(
        (r.field.as_str(), r.value, r.needs),
        ("kp_v_per_a", -1.0, Needs::Positive)
    );
    let heavy = Request::WriteGains {
        kp_v_per_a: 1.0,
        ti_s: 1e-3,
        setpoint_weight: 1.5,
    };
    let Reply::Refused(r) = ask(&mut link, &mut board, 9, heavy) else {
        panic!("refused")
    };
    assert_eq!(
        (r.field.as_str(), r.needs),
        ("setpoint_weight", Needs::Within { min: 0.0, max: 1.0 })
    );
    assert!(board.queue.is_empty());
    let arm = Request::ArmCapture {
        trigger: TriggerWire::Immediate,
        decimation: 1,
        samples: 33,
    };
    let Reply::Refused(r) = ask(&mut link, &mut board, 10, arm) else {
        panic!("refused")
    };
    assert_eq!(r.field.as_str(), "samples");
    assert_eq!(r.needs, Needs::Within { min: 1.0, max: 32.0 });
    let nan = Request::SetCurrent { current_a: f32::NAN };
    let Reply::Refused(r) = ask(&mut link, &mut board, 11, nan) else {
        panic!("refused")
    };
    assert_eq!(r.field.as_str(), "current_a");
    assert!(board.queue.is_empty());
}

#[test]
fn a_full_queue_and_latched_faults_are_said_so() {
    let (mut link, mut board) = (Link::new(), TestBoard::new());
    for tag in 0..4 {
        assert_eq!(ask(&mut link, &mut board, tag, Request::Disable), Reply::Queued);
    }
    assert_eq!(ask(&mut link, &mut board, 4, Request::Disable), Reply::Busy);
    board.tick(2048, 24.0);
    // A bus below its window latches an undervoltage.
    board.tick(2048, 5.0);
    let latched = board.cl.status().latched.bits();
    assert_ne!(latched, 0);
    assert_eq!(
        ask(&mut link, &mut board, 5, Request::Enable),
        Reply::Faulted { latched }
    );
    assert_eq!(
        ask(&mut link, &mut board, 6, Request::SetCurrent { current_a: 1.0 }),
        Reply::Faulted { latched }
    );
    assert!(board.queue.is_empty());
}

#[test]
fn a_capture_is_armed_filled_and_read_in_chunks() {
    let (mut link, mut board) = (Link::new(), TestBoard::new());
    ask(&mut link, &mut board, 1, Request::Enable);
    board.tick(2048, 24.0);
    let arm = Request::ArmCapture {
        trigger: TriggerWire::SetpointChange,
        decimation: 2,
        samples: 20,
    };
    assert_eq!(ask(&mut link, &mut board, 2, arm), Reply::Armed);
    ask(&mut link, &mut board, 3, Request::SetCurrent { current_a: 3.0 });
    for _ in 0..50 {
        board.tick(2048, 24.0);
    }
    assert_eq!(
        ask(&mut link, &mut board, 4, Request::CaptureState),
        Reply::Capture {
            state: 3,
            filled: 20,
            wanted: 20,
            decimation: 2
        }
    );
    let mut got = Vec::new();
    let mut first = 0u16;
    loop {
        let Reply::Chunk {
            first: f,
            count,
            samples,
        } = ask(&mut link, &mut board, 5, Request::ReadCapture { first })
        else {
            panic!("a chunk")
        };
        assert_eq!(f, first);
        if count == 0 {
            break;
        }
        got.extend_from_slice(&samples[..count as usize]);
        first += count as u16;
    }
    assert_eq!(got.len(), 20);
    for (w, s) in got.iter().zip(board.capture.samples()) {
        assert_eq!(
            (w.setpoint_a, w.current_a, w.bus_v),
            (s.setpoint_a, s.current_a, s.bus_v)
        );
        assert_eq!(w.duty_q15, (s.signed_duty() * 32767.0) as i16);
        assert!(w.duty_q15 > 0 && w.state == 1);
    }
    // Every other tick of a 2000 A/s ramp: 0.2 A apart.
    assert!((got[1].setpoint_a - got[0].setpoint_a - 0.2).abs() < 1e-5);
}

#[test]
fn bad_frames_get_a_reply_and_never_reach_the_loop() {
    let (mut link, mut board) = (Link::new(), TestBoard::new());
    let good = frame_of(&RequestFrame {
        version: VERSION,
        tag: 7,
        body: Request::Enable,
    });
    // A flipped bit: the check fails.
    let mut flipped = good.clone();
    flipped[2] ^= 0x10;
    let r = feed(&mut link, &mut board, &flipped);
    assert_eq!(r.len(), 1);
    assert_eq!((r[0].tag, &r[0].body), (0, &Reply::Malformed));
    // Another version.
    let other = frame_of(&RequestFrame {
        version: VERSION + 1,
        tag: 7,
        body: Request::Enable,
    });
    let r = feed(&mut link, &mut board, &other);
    assert_eq!(r[0].body, Reply::WrongVersion { device: VERSION });
    // Too long: refused at its zero, and the next frame is read.
    let mut long = std::vec![0x55u8; MAX_FRAME + 10];
    long.push(0);
    long.extend_from_slice(&good);
    let r = feed(&mut link, &mut board, &long);
    assert_eq!(r.len(), 2);
    assert_eq!(r[0].body, Reply::Oversized);
    assert_eq!((r[1].tag, &r[1].body), (7, &Reply::Queued));
    // Checked, this version, but not a request (an unknown variant).
    let mut payload = std::vec![VERSION, 7, 0, 200];
    let crc = crc16(&payload).to_le_bytes();
    payload.extend_from_slice(&crc);
    let mut coded = [0u8; 32];
    let n = cobs::try_encode(&payload, &mut coded).unwrap();
    let mut bytes = coded[..n].to_vec();
    bytes.push(0);
    let r = feed(&mut link, &mut board, &bytes);
    assert_eq!(r[0].body, Reply::Malformed);
    // Zeros alone: nothing.
    assert!(feed(&mut link, &mut board, &[0, 0, 0]).is_empty());
    assert_eq!(
        board.queue,
        [Command::Enable],
        "only the good frame reached the queue"
    );
}

#[test]
fn an_excitation_is_checked_queued_and_captured() {
    let (mut link, mut board) = (Link::new(), TestBoard::new());
    let prbs = |order| Request::Excite {
        waveform: WaveformWire::Prbs {
            offset_v: 1.0,
            amplitude_v: 2.0,
            order,
            bit_ticks: 2,
        },
        duration_ticks: 30,
        current_limit_a: 3.0,
    };
    let Reply::Refused(r) = ask(&mut link, &mut board, 1, prbs(3)) else {
        panic!("refused")
    };
    assert_eq!((r.field.as_str(), r.value), ("order", 3.0));
    ask(&mut link, &mut board, 2, Request::Enable);
    board.tick(2048, 24.0);
    assert_eq!(ask(&mut link, &mut board, 3, prbs(7)), Reply::NotDisabled);
    ask(&mut link, &mut board, 4, Request::Disable);
    board.tick(2048, 24.0);
    let arm = Request::ArmCapture {
        trigger: TriggerWire::Immediate,
        decimation: 1,
        samples: 32,
    };
    assert_eq!(ask(&mut link, &mut board, 5, arm), Reply::Armed);
    assert_eq!(ask(&mut link, &mut board, 6, prbs(7)), Reply::Queued);
    for _ in 0..40 {
        board.tick(2048, 24.0);
    }
    let Reply::Status(s) = ask(&mut link, &mut board, 7, Request::Status) else {
        panic!("a status")
    };
    assert_eq!((s.state, s.excitation_end), (0, 1), "disabled, completed");
    // The capture saw the excitation: state 3 and the PRBS's two levels
    // (3 V and -1 V on a 24 V bus) for its 30 ticks, then disabled.
    let samples = board.capture.samples();
    let exciting: Vec<_> = samples
        .iter()
        .filter(|s| s.state == crate::LoopState::Exciting)
        .collect();
    assert_eq!(exciting.len(), 30);
    assert!(
        exciting
            .iter()
            .all(|s| s.commanded_v == 3.0 || s.commanded_v == -1.0)
    );
    assert!(exciting.iter().any(|s| s.commanded_v == -1.0));
}

#[test]
fn the_device_designs_the_cancellation_gains_of_the_textbook() {
    let (mut link, mut board) = (Link::new(), TestBoard::new());
    let design = Request::Design {
        method: MethodWire::Cancellation,
        resistance_ohm: 1.9,
        inductance_h: 2.4e-3,
        settling_time_s: 2e-3,
        overshoot_pct: 5.0,
        rise_time_s: 0.0,
        delay_periods: 1.0,
    };
    let Reply::Designed {
        kp_v_per_a,
        ti_s,
        setpoint_weight,
    } = ask(&mut link, &mut board, 20, design)
    else {
        panic!("designed")
    };
    // Pole-zero cancellation (common practice): Ti = L / R puts the PI zero
    // on the winding's pole, leaving the first-order loop wc / (s + wc), which
    // settles to 2 % in ln(50) / wc; Kp = wc L.
    let wc = 50f32.ln() / 2e-3;
    assert!((kp_v_per_a / (wc * 2.4e-3) - 1.0).abs() < 1e-5, "{kp_v_per_a}");
    assert!((ti_s / (2.4e-3 / 1.9) - 1.0).abs() < 1e-5, "{ti_s}");
    assert_eq!(setpoint_weight, 1.0);
    assert!(board.queue.is_empty(), "nothing applied");
}

#[test]
fn the_device_refuses_a_design_by_its_reason() {
    let (mut link, mut board) = (Link::new(), TestBoard::new());
    let design = |r: f32, ts: f32| Request::Design {
        method: MethodWire::DirectDiscrete,
        resistance_ohm: r,
        inductance_h: 2.4e-3,
        settling_time_s: ts,
        overshoot_pct: 5.0,
        rise_time_s: 0.0,
        delay_periods: 1.0,
    };
    let Reply::DesignRefused {
        reason, field, value, ..
    } = ask(&mut link, &mut board, 20, design(-1.0, 2e-3))
    else {
        panic!("refused")
    };
    assert_eq!(
        (reason, field.as_str(), value),
        (DesignReason::NotPositive, "resistance_ohm", -1.0)
    );
    // Settling in two periods: too fast for a 50 us loop with a period's delay.
    let Reply::DesignRefused { reason, nearest, .. } = ask(&mut link, &mut board, 20, design(1.9, 100e-6))
    else {
        panic!("refused")
    };
    assert!(
        matches!(reason, DesignReason::UnstableRemainder | DesignReason::Unstable),
        "{reason:?}"
    );
    assert!(reason == DesignReason::Unstable || nearest > 100e-6, "{nearest}");
}

#[test]
fn the_device_identifies_its_winding_from_the_capture() {
    use crate::excitation::{Excitation, Waveform};
    // An invented winding, 2 ohm and 0.5 mH, stepped between 1 V and 4 V
    // every 8 ticks on a 24 V bus; the exact zero-order-hold response (the
    // duty a tick returns drives until the next tick), read by the 12-bit
    // sense (4.03 mA a count).
    let (r, l, ts) = (2.0f64, 0.5e-3f64, 50e-6f64);
    let (a, b) = ((-r * ts / l).exp(), (1.0 - (-r * ts / l).exp()) / r);
    let (mut link, mut board) = (Link::new(), TestBoard::new());
    let arm = Request::ArmCapture {
        trigger: TriggerWire::Excitation,
        decimation: 1,
        samples: 32,
    };
    assert_eq!(ask(&mut link, &mut board, 20, arm), Reply::Armed);
    let steps = Waveform::Steps {
        low_v: 1.0,
        high_v: 4.0,
        hold_ticks: 8,
    };
    board
        .board()
        .send(Command::Excite(Excitation::new(steps, 40, 3.0, 50e-6).unwrap()));
    let per_count = (board.cl.sense().to_amperes(2049) - board.cl.sense().to_amperes(2048)) as f64;
    let mut i = 0.0f64;
    for _ in 0..40 {
        let counts = (2048.0 + i / per_count).round() as u16;
        board.tick(counts, 24.0);
        let v = board.cl.last_command().signed_duty() as f64 * 24.0;
        i = a * i + b * v;
    }
    let Reply::Identified {
        resistance_ohm,
        inductance_h,
        samples,
        ..
    } = ask(
        &mut link,
        &mut board,
        20,
        Request::IdentifyCapture { delay_samples: 0 },
    )
    else {
        panic!("identified")
    };
    assert_eq!(samples, 32);
    // The sense's quantisation (4 mA on 0.5 to 2 A) is what is left.
    assert!((resistance_ohm as f64 / r - 1.0).abs() < 0.02, "{resistance_ohm}");
    assert!((inductance_h as f64 / l - 1.0).abs() < 0.03, "{inductance_h}");
    // Without an excitation in the record: nothing to fit.
    let arm = Request::ArmCapture {
        trigger: TriggerWire::Immediate,
        decimation: 1,
        samples: 8,
    };
    ask(&mut link, &mut board, 20, arm);
    for _ in 0..8 {
        board.tick(2048, 24.0);
    }
    assert_eq!(
        ask(
            &mut link,
            &mut board,
            20,
            Request::IdentifyCapture { delay_samples: 0 }
        ),
        Reply::NotIdentified {
            reason: IdentifyReason::TooFewSamples
        }
    );
}
