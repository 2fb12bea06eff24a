//! ISA-18.2 alarm states as a table: each row drives one alarm of the pure
//! book through a sequence of steps and states the state and the event
//! expected after each. Reference: the alarm state transition diagram of
//! ANSI/ISA-18.2-2016 (states normal, unacknowledged, acknowledged,
//! returned-to-normal unacknowledged, latched, shelved, suppressed by
//! design, out of service; from memory), with this program's additions
//! `alert` (engineering alerts: no acknowledge) and the outranking rule
//! out of service > shelved > suppressed.

use super::*;
use crate::settings::validate::DEFAULT_LIFE_FRACTION;

const C: &str = "TUBE";
const U: &str = "U1";
const LF: AlarmIndex = AlarmIndex::CreepLifeFraction;
const H: i64 = 3_600_000;

#[derive(Debug, Clone, Copy)]
enum Step {
    /// A life-fraction value (levels 0.3 / 0.5 / 0.7).
    V(f64),
    Ack,
    Shelve,
    Unshelve,
    Oos,
    Rts,
    /// The plant state "unit U1 offline" begins (true) or ends.
    Sup(bool),
    /// Time passes to the given hour (ends of shelves and out of service).
    Tick(i64),
}
use AlarmState::*;
use Step::*;

/// (row name, latching, engineering class, steps with the state and the
/// transition expected after each).
type Row = (&'static str, bool, bool, &'static [(Step, AlarmState, Option<Transition>)]);

const ROWS: &[Row] = &[
    (
        "activate, acknowledge, clear",
        false,
        false,
        &[
            (V(0.1), Normal, None),
            (V(0.55), Unacknowledged, Some(Transition::Activated)),
            (Ack, Acknowledged, Some(Transition::Acknowledged)),
            (V(0.1), Normal, Some(Transition::Cleared)),
        ],
    ),
    (
        "clear before acknowledge, then acknowledge",
        false,
        false,
        &[
            (V(0.55), Unacknowledged, Some(Transition::Activated)),
            (V(0.1), RtnUnacknowledged, Some(Transition::Cleared)),
            (V(0.55), Unacknowledged, Some(Transition::Activated)),
            (V(0.1), RtnUnacknowledged, Some(Transition::Cleared)),
            (Ack, Normal, Some(Transition::Acknowledged)),
        ],
    ),
    (
        "escalation re-enters unacknowledged",
        false,
        false,
        &[
            (V(0.55), Unacknowledged, Some(Transition::Activated)),
            (Ack, Acknowledged, Some(Transition::Acknowledged)),
            (V(0.75), Unacknowledged, Some(Transition::Escalated)),
            (Ack, Acknowledged, Some(Transition::Acknowledged)),
            (V(0.6), Acknowledged, Some(Transition::SteppedDown)),
        ],
    ),
    (
        "latched: acknowledged while active, still asks after clearing",
        true,
        false,
        &[
            (V(0.55), Unacknowledged, Some(Transition::Activated)),
            (Ack, Acknowledged, Some(Transition::Acknowledged)),
            (V(0.1), RtnUnacknowledged, Some(Transition::Cleared)),
            (Ack, Normal, Some(Transition::Acknowledged)),
        ],
    ),
    (
        "shelved: followed silently, active at the end is unacknowledged",
        false,
        false,
        &[
            (V(0.55), Unacknowledged, Some(Transition::Activated)),
            (Ack, Acknowledged, Some(Transition::Acknowledged)),
            (Shelve, Shelved, Some(Transition::Shelved)),
            (V(0.75), Shelved, None),
            (Ack, Shelved, None),
            (Tick(20), Unacknowledged, Some(Transition::ShelveExpired)),
        ],
    ),
    (
        "unshelved while clear: normal",
        false,
        false,
        &[
            (V(0.55), Unacknowledged, Some(Transition::Activated)),
            (Shelve, Shelved, Some(Transition::Shelved)),
            (V(0.1), Shelved, None),
            (Unshelve, Normal, Some(Transition::Unshelved)),
        ],
    ),
    (
        "out of service outranks a shelve and ends by command",
        false,
        false,
        &[
            (V(0.55), Unacknowledged, Some(Transition::Activated)),
            (Oos, OutOfService, Some(Transition::RemovedFromService)),
            (Shelve, OutOfService, None),
            (V(0.1), OutOfService, None),
            (V(0.6), OutOfService, None),
            (Rts, Unacknowledged, Some(Transition::ReturnedToService)),
        ],
    ),
    (
        "out of service ends at its time",
        false,
        false,
        &[
            (V(0.1), Normal, None),
            (Oos, OutOfService, Some(Transition::RemovedFromService)),
            (Tick(2000), Normal, Some(Transition::ReturnedToService)),
        ],
    ),
    (
        "suppressed by plant state: recorded, annunciated when it ends",
        false,
        false,
        &[
            (V(0.1), Normal, None),
            (Sup(true), Suppressed, None),
            (V(0.55), Suppressed, Some(Transition::Activated)),
            (Ack, Suppressed, None),
            (Sup(false), Unacknowledged, Some(Transition::Unsuppressed)),
        ],
    ),
    (
        "suppression of an active alarm, clear when it ends",
        false,
        false,
        &[
            (V(0.55), Unacknowledged, Some(Transition::Activated)),
            (Sup(true), Suppressed, Some(Transition::Suppressed)),
            (V(0.1), Suppressed, Some(Transition::Cleared)),
            (Sup(false), Normal, None),
        ],
    ),
    (
        "a shelve lifted during a suppression returns to it",
        false,
        false,
        &[
            (V(0.55), Unacknowledged, Some(Transition::Activated)),
            (Shelve, Shelved, Some(Transition::Shelved)),
            (Sup(true), Shelved, None),
            (Unshelve, Suppressed, Some(Transition::Unshelved)),
        ],
    ),
    (
        "engineering alert: no acknowledge asked",
        false,
        true,
        &[
            (V(0.55), Alert, Some(Transition::Activated)),
            (Ack, Alert, None),
            (V(0.75), Alert, Some(Transition::Escalated)),
            (V(0.1), Normal, Some(Transition::Cleared)),
        ],
    ),
];

fn book(latching: bool, engineering: bool) -> AlarmBook {
    let class = if engineering { AlarmClass::Engineering } else { AlarmClass::Operator };
    let settings = RationaleSettings { class: Some(class), latching: Some(latching), ..Default::default() };
    AlarmBook::new().with_config(AlarmConfig {
        delays: AlarmIndex::ALL.into_iter().map(|i| (i, Delay::NONE)).collect(),
        rationale: [(LF, settings)].into(),
        ..AlarmConfig::default()
    })
}

#[test]
fn isa_18_2_state_transitions() {
    let offline = SuppressionRule { name: "unit U1 offline".into(), units: vec![U.into()], indices: vec![] };
    for (name, latching, engineering, steps) in ROWS {
        let mut b = book(*latching, *engineering);
        for (k, (step, want_state, want_transition)) in steps.iter().enumerate() {
            let t = (k as i64 + 1) * H;
            let ev = match *step {
                V(v) => b.evaluate(C, U, LF, v, &DEFAULT_LIFE_FRACTION, t),
                Ack => b.acknowledge(C, Some(LF), "op", t).unwrap(),
                Shelve => b.shelve(C, Some(LF), t + 8 * H, "op", "test", t).unwrap(),
                Unshelve => b.unshelve(C, Some(LF), "op", t).unwrap(),
                Oos => {
                    let cmd = parse_command(
                        br#"{"action":"remove_from_service","component":"TUBE","by":"I&C","reason":"TC repair","duration_h":1000}"#,
                    )
                    .unwrap();
                    b.apply(&cmd, t).unwrap()
                }
                Rts => {
                    let cmd =
                        parse_command(br#"{"action":"return_to_service","component":"TUBE","by":"I&C"}"#).unwrap();
                    b.apply(&cmd, t).unwrap()
                }
                Sup(on) => b.set_suppression(if on { vec![offline.clone()] } else { vec![] }, t),
                Tick(h) => b.tick(h * H),
            };
            let rec = b.record("TUBE/creep_life_fraction").unwrap();
            assert_eq!(rec.state, *want_state, "{name}: step {k} {step:?}: state");
            let got: Vec<Transition> = ev.iter().map(|e| e.transition).collect();
            assert_eq!(got, want_transition.iter().copied().collect::<Vec<_>>(), "{name}: step {k} {step:?}: events");
            if let Some(e) = ev.last() {
                assert_eq!(e.state, *want_state, "{name}: step {k}: the event states the new state");
            }
        }
    }
}
