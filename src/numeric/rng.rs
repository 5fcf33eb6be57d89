//! Per-trial random streams: every (point, trial) of a campaign, a hunt or a game gets its
//! own ChaCha8 stream, so results do not depend on the number of threads.

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

/// The random stream of trial `trial` of point `point` in a campaign seeded `seed`: a
/// ChaCha8 generator keyed by a SplitMix64 mix of (seed, point) on stream `trial`.
pub fn trial_rng(seed: u64, point: u64, trial: u64) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(splitmix(seed ^ splitmix(point.wrapping_add(0x9e37_79b9_7f4a_7c15))));
    rng.set_stream(trial);
    rng
}

fn splitmix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}
