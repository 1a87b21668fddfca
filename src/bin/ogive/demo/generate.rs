//! The invented demo data: a food distributor's fleet of refrigerated trailers.
//!
//! Nothing here is measured; it is made up by a seeded generator so that the demo's
//! questions have something to find. 3 depots with 4 trailers and 3 routes each; 6 weeks
//! of cargo temperature every 5 minutes (12 × 42 × 288 = 145,152 readings).
//!
//! The model, per trailer and 5-minute step: with the doors shut, the air temperature
//! relaxes toward the unit's setpoint (about 3 degC, cycling ±0.35 degC with the
//! compressor) with a time constant of 15 minutes, plus small noise; with a door open it
//! relaxes toward the outside air (warmer by day, and by depot) with a time constant of 45
//! minutes. Trailers leave in the early morning on a city, regional or long-haul route and
//! open their doors at each stop; on Sundays and rest days they stay plugged in at the
//! depot. One trailer's refrigeration unit degrades from day 22 on: its setpoint creeps up
//! by 2.2 degC and its recovery slows to a 55-minute time constant by the last day. The
//! logger reports to 0.1 degC and drops about one reading in a thousand (NULL).

/// The seed of the demo data.
pub const SEED: u64 = 20_240_902;
/// Days of readings: 6 weeks starting Monday 2024-09-02.
pub const DAYS: usize = 42;
/// Readings per day (one every 5 minutes).
pub const PER_DAY: usize = 288;
/// The trailer whose cooling degrades.
pub const DEGRADING: &str = "TR07";
/// Day (0-based) on which the degradation starts.
const DEGRADE_FROM: f64 = 21.0;

/// The demo's generator: xoshiro256** from ogive's one random-number module, with the
/// draws the invented data needs.
pub struct Rng {
    core: ogive::stats::rng::Xoshiro256ss,
    spare: Option<f64>,
}

impl Rng {
    pub fn new(seed: u64) -> Rng {
        Rng {
            core: ogive::stats::rng::Xoshiro256ss::new(seed),
            spare: None,
        }
    }

    pub fn next_u64(&mut self) -> u64 {
        self.core.next_u64()
    }

    /// Uniform on [0, 1).
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Uniform on [lo, hi).
    pub fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.uniform()
    }

    /// A whole number in lo..=hi.
    pub fn int(&mut self, lo: i64, hi: i64) -> i64 {
        lo + (self.uniform() * (hi - lo + 1) as f64) as i64
    }

    /// Standard normal (Marsaglia's polar method).
    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        loop {
            let u = 2.0 * self.uniform() - 1.0;
            let v = 2.0 * self.uniform() - 1.0;
            let s = u * u + v * v;
            if s > 0.0 && s < 1.0 {
                let m = (-2.0 * s.ln() / s).sqrt();
                self.spare = Some(v * m);
                return u * m;
            }
        }
    }
}

pub struct Depot {
    pub code: &'static str,
    pub name: &'static str,
    /// Mean daytime outside temperature, degC.
    pub ambient: f64,
}

pub const DEPOTS: [Depot; 3] = [
    Depot {
        code: "NG",
        name: "Northgate",
        ambient: 15.0,
    },
    Depot {
        code: "HB",
        name: "Harbourside",
        ambient: 18.0,
    },
    Depot {
        code: "VF",
        name: "Valleyfield",
        ambient: 22.0,
    },
];

pub struct RouteKind {
    pub kind: &'static str,
    pub stops: i64,
    pub hours: f64,
    /// Steps a door stays open at a stop (inclusive range).
    pub door_steps: (i64, i64),
}

pub const ROUTE_KINDS: [RouteKind; 3] = [
    RouteKind {
        kind: "city",
        stops: 12,
        hours: 8.0,
        door_steps: (1, 2),
    },
    RouteKind {
        kind: "regional",
        stops: 6,
        hours: 10.0,
        door_steps: (1, 2),
    },
    RouteKind {
        kind: "long-haul",
        stops: 2,
        hours: 12.0,
        door_steps: (2, 3),
    },
];

/// One 5-minute reading.
pub struct Reading {
    pub trailer: usize,
    pub day: usize,
    pub step: usize,
    /// Index into routes (depot * 3 + kind), or None when parked.
    pub route: Option<usize>,
    pub door_open: bool,
    pub pallets: i64,
    pub temp_c: Option<f64>,
}

pub fn trailer_name(t: usize) -> String {
    format!("TR{:02}", t + 1)
}

pub fn route_name(r: usize) -> String {
    format!("{}-{}", DEPOTS[r / 3].code, ROUTE_KINDS[r % 3].kind)
}

/// "YYYY-MM-DD" of a day index (day 0 is Monday 2024-09-02), by the civil-from-days
/// algorithm of Howard Hinnant.
pub fn date(day: usize) -> String {
    let z = 19_968 + day as i64 + 719_468; // 19968 = days from 1970-01-01 to 2024-09-02
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!("{y:04}-{m:02}-{d:02}")
}

/// What a trailer does at each step of one day.
#[derive(Clone, Copy)]
struct Slot {
    route: Option<usize>,
    door: bool,
    pallets: i64,
    /// Outside air temperature the open door lets in.
    outside: f64,
}

fn plan_day(rng: &mut Rng, trailer: usize, day: usize) -> Vec<Slot> {
    let depot = trailer / 4;
    let parked = Slot {
        route: None,
        door: false,
        pallets: 0,
        outside: 0.0,
    };
    let mut slots = vec![parked; PER_DAY];
    let ambient = DEPOTS[depot].ambient;
    for (k, s) in slots.iter_mut().enumerate() {
        let hour = k as f64 / 12.0;
        s.outside = ambient + 5.0 * (std::f64::consts::TAU * (hour - 9.0) / 24.0).sin();
    }
    let weekday = day % 7;
    let slot_in_depot = (trailer % 4 + day) % 4;
    if weekday == 6 || slot_in_depot == 3 {
        return slots;
    }
    let kind = &ROUTE_KINDS[slot_in_depot];
    let route = depot * 3 + slot_in_depot;
    let depart = ((5.0 * 60.0 + rng.range(0.0, 90.0)) / 5.0) as usize;
    let length = ((kind.hours * 60.0 + rng.range(-45.0, 45.0)) / 5.0) as usize;
    let back = (depart + length).min(PER_DAY - 1);
    let load = if kind.kind == "city" {
        rng.int(18, 26)
    } else {
        rng.int(12, 24)
    };
    // Loading at the dock: doors open, cool dock air.
    for s in slots.iter_mut().take(depart).skip(depart.saturating_sub(3)) {
        s.door = true;
        s.outside = 10.0;
        s.pallets = load;
    }
    let mut pallets = load;
    let stops: Vec<usize> = (1..=kind.stops)
        .map(|i| {
            let at = depart as f64 + (back - depart) as f64 * i as f64 / (kind.stops + 1) as f64;
            (at + rng.range(-3.0, 3.0)) as usize
        })
        .collect();
    for k in depart..back {
        slots[k].route = Some(route);
        slots[k].pallets = pallets;
        if let Some(i) = stops.iter().position(|&s| s == k) {
            let open = rng.int(kind.door_steps.0, kind.door_steps.1) as usize;
            for s in slots.iter_mut().skip(k).take(open) {
                s.door = true;
            }
            let left = kind.stops - i as i64 - 1;
            pallets = if left == 0 {
                0
            } else {
                pallets - pallets / (left + 1)
            };
        }
    }
    slots
}

/// Generates every reading, trailer by trailer, calling `emit` for each. `stop` is polled
/// once a day of readings and ends the generation early when it returns true.
pub fn generate(mut emit: impl FnMut(&Reading), mut stop: impl FnMut() -> bool) -> bool {
    let mut rng = Rng::new(SEED);
    let healthy_a = 1.0 - (-5.0f64 / 15.0).exp();
    let door_a = 1.0 - (-5.0f64 / 45.0).exp();
    for t in 0..12 {
        let offset = 0.2 * rng.normal();
        let phase = rng.range(0.0, std::f64::consts::TAU);
        let mut temp = 3.0 + offset;
        let degrading = trailer_name(t) == DEGRADING;
        for day in 0..DAYS {
            if stop() {
                return false;
            }
            let plan = plan_day(&mut rng, t, day);
            for (step, slot) in plan.iter().enumerate() {
                let time = (day * PER_DAY + step) as f64;
                let worn = if degrading {
                    ((time / PER_DAY as f64 - DEGRADE_FROM) / (DAYS as f64 - DEGRADE_FROM))
                        .clamp(0.0, 1.0)
                } else {
                    0.0
                };
                let setpoint = 3.0
                    + offset
                    + 2.2 * worn
                    + 0.35 * (std::f64::consts::TAU * time / 8.0 + phase).sin();
                if slot.door {
                    temp += (slot.outside - temp) * door_a;
                } else {
                    let a = if worn > 0.0 {
                        1.0 - (-5.0 / (15.0 + 40.0 * worn)).exp()
                    } else {
                        healthy_a
                    };
                    temp += (setpoint - temp) * a + 0.12 * rng.normal();
                }
                let logged = if rng.uniform() < 0.001 {
                    None
                } else {
                    Some(((temp + 0.05 * rng.normal()) * 10.0).round() / 10.0)
                };
                emit(&Reading {
                    trailer: t,
                    day,
                    step,
                    route: slot.route,
                    door_open: slot.door,
                    pallets: slot.pallets,
                    temp_c: logged,
                });
            }
        }
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates() {
        assert_eq!(date(0), "2024-09-02");
        assert_eq!(date(29), "2024-10-01");
        assert_eq!(date(41), "2024-10-13");
    }

    #[test]
    fn same_seed_same_data() {
        let collect = || {
            let mut v = Vec::new();
            generate(|r| v.push(r.temp_c.map(f64::to_bits)), || false);
            v
        };
        let a = collect();
        assert_eq!(a.len(), 12 * DAYS * PER_DAY);
        assert_eq!(a, collect());
    }

    #[test]
    fn uniform_stays_in_range() {
        let mut r = Rng::new(1);
        for _ in 0..10_000 {
            let u = r.uniform();
            assert!((0.0..1.0).contains(&u));
        }
    }
}
