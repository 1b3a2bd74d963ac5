//! The bench link's decoder and handler fed a million random and mutated
//! frames: nothing panics, every reply is a frame the host can read, a frame
//! that is not a checked request of this version gets an error reply and
//! never reaches the loop, and at most one reply comes per frame.
//!
//! Each property-test case draws a seed; a small generator (SplitMix64,
//! Steele, Lea and Flood, "Fast splittable pseudorandom number generators",
//! OOPSLA 2014) makes 1,000 frames from it, so the default 1,000 cases feed
//! 10^6 frames (`PROPTEST_CASES` scales it).

use pi_core::capture::Capture;
use pi_core::link::frame::{FrameDecoder, MAX_FRAME, MAX_PAYLOAD, crc16, encode, parse};
use pi_core::link::{
    Link, LoopBoard, MethodWire, Reply, ReplyFrame, Request, RequestFrame, TriggerWire, VERSION, WaveformWire,
};
use pi_core::prelude::*;
use proptest::prelude::*;

use ampwright_tests::cases;

struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
    fn f32(&mut self) -> f32 {
        match self.below(6) {
            0 => f32::NAN,
            1 => f32::INFINITY,
            2 => -f32::INFINITY,
            3 => f32::from_bits(self.next() as u32),
            _ => (self.below(2001) as f32 - 1000.0) / 100.0,
        }
    }
    fn u16(&mut self) -> u16 {
        if self.below(2) == 0 {
            self.below(40) as u16
        } else {
            self.next() as u16
        }
    }
}

/// An invented 24 V board with its loop, its capture and a four-command queue
/// that `tick` drains, as the control interrupt would.
struct FuzzBoard {
    cl: CurrentLoop,
    queue: Vec<Command>,
    capture: Capture<64>,
    sent: usize,
}

impl FuzzBoard {
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
            sent: 0,
        }
    }

    fn tick(&mut self, counts: u16) {
        for c in self.queue.drain(..) {
            let _ = self.cl.apply(c);
        }
        let input = TickInput {
            current_counts: counts,
            bus_v: 24.0,
            speed_rad_s: None,
        };
        self.cl.tick(&input);
        self.capture.record(&self.cl, &input);
    }
}

impl FuzzBoard {
    /// The main loop's view for the handler: four commands at most wait,
    /// and every one handed over is counted.
    fn board(&mut self) -> LoopBoard<'_, 64, impl FnMut(Command) -> bool + '_> {
        let (queue, sent) = (&mut self.queue, &mut self.sent);
        LoopBoard {
            cl: &self.cl,
            capture: &mut self.capture,
            send: move |c| {
                if queue.len() >= 4 {
                    return false;
                }
                *sent += 1;
                queue.push(c);
                true
            },
        }
    }
}

fn random_request(rng: &mut Rng) -> Request {
    match rng.below(16) {
        0 => Request::Hello,
        1 => Request::Status,
        2 => Request::Enable,
        3 => Request::Disable,
        4 => Request::ClearFaults,
        5 => Request::SetCurrent { current_a: rng.f32() },
        6 => Request::ReadGains,
        7 => Request::WriteGains {
            kp_v_per_a: rng.f32(),
            ti_s: rng.f32(),
            setpoint_weight: rng.f32(),
        },
        8 => Request::ReadLimits,
        9 => Request::ArmCapture {
            trigger: match rng.below(4) {
                0 => TriggerWire::Immediate,
                1 => TriggerWire::SetpointChange,
                2 => TriggerWire::Excitation,
                _ => TriggerWire::Level {
                    level_a: rng.f32(),
                    rising: rng.below(2) == 0,
                },
            },
            decimation: rng.u16(),
            samples: rng.u16(),
        },
        10 => Request::CaptureState,
        11 => Request::Excite {
            waveform: match rng.below(3) {
                0 => WaveformWire::Steps {
                    low_v: rng.f32(),
                    high_v: rng.f32(),
                    hold_ticks: rng.next() as u32 >> rng.below(32),
                },
                1 => WaveformWire::Prbs {
                    offset_v: rng.f32(),
                    amplitude_v: rng.f32(),
                    order: rng.below(20) as u8,
                    bit_ticks: rng.u16() as u32,
                },
                _ => WaveformWire::Chirp {
                    offset_v: rng.f32(),
                    amplitude_v: rng.f32(),
                    f0_hz: rng.f32() * 100.0,
                    f1_hz: rng.f32() * 1000.0,
                },
            },
            duration_ticks: rng.u16() as u32,
            current_limit_a: rng.f32(),
        },
        12 => Request::Design {
            method: match rng.below(4) {
                0 => MethodWire::DirectDiscrete,
                1 => MethodWire::RootLocus,
                2 => MethodWire::ModulusOptimum,
                _ => MethodWire::Cancellation,
            },
            resistance_ohm: rng.f32(),
            inductance_h: rng.f32() * 1e-3,
            settling_time_s: rng.f32() * 1e-2,
            overshoot_pct: rng.f32() * 10.0,
            rise_time_s: rng.f32() * 1e-3,
            delay_periods: rng.f32(),
        },
        13 => Request::IdentifyCapture {
            delay_samples: rng.below(12) as u8,
        },
        _ => Request::ReadCapture { first: rng.u16() },
    }
}

/// A payload sealed as a frame: CRC, COBS, the closing zero.
fn seal(payload: &[u8]) -> Vec<u8> {
    let mut checked = payload.to_vec();
    checked.extend_from_slice(&crc16(payload).to_le_bytes());
    let mut out = vec![0u8; checked.len() + checked.len() / 254 + 2];
    let n = cobs::try_encode(&checked, &mut out).unwrap();
    out.truncate(n);
    out.push(0);
    out
}

/// What one generated frame is.
#[derive(Clone, Copy, PartialEq, Debug)]
enum Kind {
    /// A checked request of this version: answered.
    Valid,
    /// Checked, but its payload was changed: may or may not be a request.
    Mutated,
    /// Fails the frame check: must not reach the loop.
    Garbage,
}

fn random_frame(rng: &mut Rng) -> (Vec<u8>, Kind) {
    let request = RequestFrame {
        version: VERSION,
        tag: rng.next() as u16,
        body: random_request(rng),
    };
    let mut out = [0u8; MAX_FRAME];
    let n = encode(&request, &mut out).unwrap();
    let good = out[..n].to_vec();
    match rng.below(8) {
        0 => (good, Kind::Valid),
        1 | 2 => {
            // The payload changed, then sealed again: reaches the parser.
            let mut payload = postcard_bytes(&request);
            match rng.below(4) {
                0 if !payload.is_empty() => {
                    let i = rng.below(payload.len() as u64) as usize;
                    payload[i] ^= 1 << rng.below(8);
                }
                1 if !payload.is_empty() => {
                    let keep = rng.below(payload.len() as u64) as usize;
                    payload.truncate(keep);
                }
                2 => {
                    for _ in 0..=rng.below(8) {
                        payload.push(rng.next() as u8);
                    }
                }
                _ => {
                    let len = rng.below(MAX_PAYLOAD as u64 + 40) as usize;
                    payload = (0..len).map(|_| rng.next() as u8).collect();
                    if rng.below(2) == 0 && !payload.is_empty() {
                        payload[0] = VERSION;
                    }
                }
            }
            (seal(&payload), Kind::Mutated)
        }
        3 | 4 => {
            // A valid frame damaged on the line: a bit, a lost or an added byte.
            let mut bytes = good;
            let body = bytes.len() - 1;
            match rng.below(3) {
                0 => {
                    let i = rng.below(body as u64) as usize;
                    bytes[i] ^= 1 << rng.below(8);
                    if bytes[i] == 0 {
                        bytes[i] = 0x5A; // a zero would split it in two frames
                    }
                }
                1 => {
                    let i = rng.below(body as u64) as usize;
                    bytes.remove(i);
                }
                _ => {
                    let i = rng.below(body as u64) as usize;
                    bytes.insert(i, (rng.below(255) + 1) as u8);
                }
            }
            (
                bytes.clone(),
                if passes_check(&bytes) {
                    Kind::Mutated
                } else {
                    Kind::Garbage
                },
            )
        }
        _ => {
            // Random bytes without zeros, of any length up to twice a frame.
            let len = rng.below(2 * MAX_FRAME as u64) as usize;
            let mut bytes: Vec<u8> = (0..len).map(|_| (rng.below(255) + 1) as u8).collect();
            bytes.push(0);
            (
                bytes.clone(),
                if passes_check(&bytes) {
                    Kind::Mutated
                } else {
                    Kind::Garbage
                },
            )
        }
    }
}

/// Whether damaged bytes still pass the frame check (a CRC-16 misses about
/// one in 65,536 of the damage it cannot always see: such a frame counts as
/// mutated, not as garbage).
fn passes_check(bytes: &[u8]) -> bool {
    let mut decoder = FrameDecoder::new();
    bytes.iter().any(|&b| matches!(decoder.push(b), Some(Ok(_))))
}

fn postcard_bytes(request: &RequestFrame) -> Vec<u8> {
    // The frame's payload: undo the framing of `encode`.
    let mut out = [0u8; MAX_FRAME];
    let n = encode(request, &mut out).unwrap();
    let mut decoder = FrameDecoder::new();
    let mut payload = Vec::new();
    for &b in &out[..n] {
        if let Some(p) = decoder.push(b) {
            payload = p.unwrap().to_vec();
        }
    }
    payload
}

fn run(seed: u64, frames: usize) -> Result<(), TestCaseError> {
    let mut rng = Rng(seed);
    let mut link = Link::new();
    let mut board = FuzzBoard::new();
    let mut reader = FrameDecoder::new();
    for _ in 0..frames {
        let (bytes, kind) = random_frame(&mut rng);
        let sent_before = board.sent;
        let mut replies = Vec::new();
        for &b in &bytes {
            if let Some(out) = link.receive(b, &mut board.board()) {
                prop_assert!(out.len() <= MAX_FRAME);
                for &o in out {
                    if let Some(payload) = reader.push(o) {
                        let payload = payload.map_err(|e| TestCaseError::fail(format!("{e:?}")))?;
                        let reply = parse::<ReplyFrame>(payload);
                        prop_assert!(reply.is_some(), "a reply the host cannot read");
                        replies.push(reply.unwrap());
                    }
                }
            }
        }
        // A frame longer than the buffer splits into no more than it holds.
        prop_assert!(
            replies.len() <= 1,
            "{} replies to one frame ({kind:?})",
            replies.len()
        );
        match kind {
            Kind::Valid => {
                prop_assert_eq!(replies.len(), 1);
                let body = &replies[0].body;
                let refused = matches!(
                    body,
                    Reply::Malformed | Reply::Oversized | Reply::WrongVersion { .. }
                );
                prop_assert!(!refused, "a good request was refused: {:?}", body);
            }
            Kind::Garbage => {
                prop_assert_eq!(board.sent, sent_before, "a damaged frame reached the loop");
                if let Some(r) = replies.first() {
                    prop_assert!(
                        matches!(
                            r.body,
                            Reply::Malformed | Reply::Oversized | Reply::WrongVersion { .. }
                        ),
                        "a damaged frame was answered: {:?}",
                        r.body
                    );
                }
            }
            Kind::Mutated => {}
        }
        if rng.below(4) == 0 {
            board.tick(2048 + rng.below(64) as u16);
        }
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: cases(1000), ..ProptestConfig::default() })]

    #[test]
    fn a_million_random_and_mutated_frames(seed in any::<u64>()) {
        run(seed, 1000)?;
    }
}
