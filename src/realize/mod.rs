//! The active on parts build: every resistor and capacitor of the active
//! exact build on a preferred value (IEC 60063, see [`crate::parts`]), capacitors inside
//! the range the designer buys, and one trimming resistor per GIC that
//! restores what its converter realizes.
//!
//! The steps, in the order a designer takes them:
//! 1. FDNR image only: one impedance level for the whole image, chosen so
//!    that its termination capacitors (the images of the terminations,
//!    whose value no converter sets) land on capacitor-series values in
//!    range. Scaling every impedance by one factor leaves every voltage
//!    ratio unchanged, so the image still realizes the ladder. A
//!    simulated-inductor build keeps the ladder's own resistors and
//!    capacitors, whose level the terminations set: the design stage
//!    chooses it ([`ladder_level`], in `level`) before the build is made.
//!    Such a capacitor outside a range the design file sets is an error
//!    ([`PartsSnapError::OutOfRange`]); outside the default range it
//!    stays where it is, on its nearest series value, and the level
//!    choice has warned of it.
//! 2. Each converter's capacitors are put on the capacitor-series value
//!    in range nearest to them by the converter's own freedoms (its
//!    impedance level, and for an FDNR's Z1 its balance point; see
//!    [`crate::active::chain`]), which keep its realized L or D and its op-amp
//!    balance. These are the "ideal values": the network realizes exactly
//!    what the build did.
//! 3. Every resistor snaps to the nearest resistor-series value and every
//!    other capacitor to the nearest capacitor-series value in range.
//! 4. One resistor per GIC chain (Z1 of an inductor, outside both op-amp
//!    loops; a loop resistor of an FDNR, whose Z1 is a capacitor) is solved
//!    with the snapped others ([`Trim`]): so that the converter resonates
//!    with its partner as snapped where it belongs to an L-C pair (the
//!    pair's product restored, see `tuning`), else so that it realizes
//!    its ideal value again; a floating inductor has two chains, and both
//!    must match or it leaks to ground, so it gets two trims, both to the
//!    same value. The tuning procedure's steps (`tuning`) read the
//!    resonances on the bench.
//!
//! The largest passband deviation from the passive ideal is measured with
//! the build's own op-amps after each step ([`ErrorSteps`]). The trims
//! remove the converters' share of the snapping error; what they cannot
//! remove is that of the parts outside any converter: the ladder's own
//! capacitors in a simulated-inductor build, the images of the ladder's
//! inductors (resistors) in an FDNR image.
//!
//! Invariants of a [`SnappedBuild`]: its netlist has the build's
//! elements, names and nodes; every resistor but the trims is a
//! resistor-series value, every capacitor a capacitor-series value inside
//! the range (but a ladder capacitor outside a default range, on its
//! nearest series value); every converter realizes, with ideal op-amps, the value it
//! realized in the build (an FDNR's D divided by the image level of step
//! 1, which multiplied every impedance of the image), times its partner's
//! value before snapping over its snapped value where it has one.

mod converter_level;
mod error;
mod level;
mod trim;
mod tuning;

pub use converter_level::{choose_levels, ConverterLevel, ConverterLevels, LevelGoal, MIN_GAIN_DB};
pub use error::PartsSnapError;
pub use level::{ladder_level, LadderLevel, LadderPart};
pub use trim::{Trim, TRIMMER_SERIES};
pub use tuning::{
    arms, generator_level_v, resonators, Arm, Reading, Resonator, TrimGoal, TuningStep, CLIP_OHM,
    TRIMMER_RESOLUTION,
};

use crate::active::chain::{self, is_capacitor, scale_impedance, value, Chain, Moves};
use crate::active::{ActiveBuild, DampingResistor, Handles, Meter, Note, Stage, PASSBAND_POINTS};
use crate::circuit::{band_grid, AcSystem, CircuitError, Element, ElementKind, Netlist};
use crate::parts::{Distribution, PartsChoice, Tolerance};

/// Relative slack on the capacitor range for values placed on one of its
/// ends: rescaling by a computed factor can land a few units in the last
/// place outside the end it aimed at. Far below any part tolerance.
const RANGE_SLACK: f64 = 1e-9;

/// Whether `value` lies in `(low, high)` within [`RANGE_SLACK`].
fn within(value: f64, (low, high): (f64, f64)) -> bool {
    value >= low * (1.0 - RANGE_SLACK) && value <= high * (1.0 + RANGE_SLACK)
}

/// What the parts stage asks of a [`PartsChoice`].
trait Buying {
    fn check(&self) -> Result<(), PartsSnapError>;
    fn contains(&self, farad: f64) -> bool;
    fn in_range(&self, farad: f64) -> Result<f64, PartsSnapError>;
    fn snap_capacitor(&self, farad: f64) -> Result<f64, PartsSnapError>;
    fn tolerance_of(&self, netlist: &Netlist, index: usize) -> f64;
}

impl Buying for PartsChoice {
    /// Checks the tolerances (0 to [`crate::parts::MAX_TOLERANCE`]) and the
    /// range (0 < low <= high, finite, holding a capacitor-series value);
    /// names the design-file key.
    fn check(&self) -> Result<(), PartsSnapError> {
        for (key, value) in [
            ("parts.resistor_tolerance", self.resistor_tolerance),
            ("parts.capacitor_tolerance", self.capacitor_tolerance),
        ] {
            Tolerance::new(value, Distribution::Uniform)
                .map_err(|_| PartsSnapError::BadTolerance { key, value })?;
        }
        let (low_f, high_f) = self.capacitor_range_f;
        if !(low_f > 0.0 && low_f <= high_f && high_f.is_finite()) {
            return Err(PartsSnapError::BadRange { low_f, high_f });
        }
        // Fails with NoSeriesValue when the range holds no series value.
        self.in_range(low_f).map(|_| ())
    }

    /// Whether `farad` lies in the range (within [`RANGE_SLACK`]).
    fn contains(&self, farad: f64) -> bool {
        within(farad, self.capacitor_range_f)
    }

    /// The capacitor-series value in range nearest to `farad` (the range
    /// end's nearest series value inside it, for a value outside).
    fn in_range(&self, farad: f64) -> Result<f64, PartsSnapError> {
        let (low_f, high_f) = self.capacitor_range_f;
        let series = self.capacitor_series;
        let snap = |cause| PartsSnapError::Snap {
            element: "parts.capacitor_range".to_string(),
            cause,
        };
        let near = series.nearest(farad.clamp(low_f, high_f)).map_err(snap)?;
        let inside = if near < low_f {
            series.snap_up(low_f).map_err(snap)?
        } else if near > high_f {
            series.snap_down(high_f).map_err(snap)?
        } else {
            near
        };
        if (low_f..=high_f).contains(&inside) {
            Ok(inside)
        } else {
            Err(PartsSnapError::NoSeriesValue {
                series,
                low_f,
                high_f,
            })
        }
    }

    /// The capacitor-series value for `farad`: in range when the range is
    /// a limit or `farad` lies in it; the nearest one otherwise (a ladder
    /// capacitor outside a default range, warned of by the level choice).
    fn snap_capacitor(&self, farad: f64) -> Result<f64, PartsSnapError> {
        if self.capacitor_range_given || self.contains(farad) {
            return self.in_range(farad);
        }
        self.capacitor_series
            .nearest(farad)
            .map_err(|cause| PartsSnapError::Snap {
                element: "parts.capacitor_range".to_string(),
                cause,
            })
    }

    /// The tolerance of element `index` by its kind (0 for what is
    /// neither a resistor nor a capacitor).
    fn tolerance_of(&self, netlist: &Netlist, index: usize) -> f64 {
        match netlist.elements[index].kind() {
            ElementKind::Resistor => self.resistor_tolerance,
            ElementKind::Capacitor => self.capacitor_tolerance,
            _ => 0.0,
        }
    }
}

/// The largest passband deviation from the passive ideal after each step,
/// dB, with the build's op-amp model.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct ErrorSteps {
    /// The build as given.
    pub as_built: f64,
    /// After rescaling (steps 1 and 2 of the module documentation): exact
    /// values, converter capacitors on series values in range.
    pub ideal_values: f64,
    /// Every resistor and capacitor on its series.
    pub snapped: f64,
    /// With the trimming resistors solved.
    pub trimmed: f64,
}

/// An active build on real parts.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SnappedBuild {
    /// The network, trimmed: every trim at its solved value.
    pub netlist: Netlist,
    /// The build's stages with the values the snapped network realizes
    /// (converters: the value their trims set).
    pub stages: Vec<Stage>,
    /// One trimming resistor per GIC chain, in stage order.
    pub trims: Vec<Trim>,
    /// The tuning procedure: the steps that set the trims read on the
    /// bench, in order (every other trim is preset).
    pub procedure: Vec<TuningStep>,
    /// The network before the trims were solved: every trim element on
    /// its nearest series value (what the board is with untrimmed fixed
    /// resistors).
    #[serde(skip)]
    pub untrimmed: Netlist,
    /// What each rescaling did.
    pub rescaled: Vec<Rescale>,
    /// The passband error after each step.
    pub error_db: ErrorSteps,
}

/// Snaps `build` (the active network of `passive`) to the parts of
/// `choice` (see the module documentation), measuring the errors over
/// `passband_hz` (`[low, high]` bands, Hz) on [`PASSBAND_POINTS`]
/// log-spaced points each; each converter's level capacitor on the value
/// `levels` chose for it (see [`choose_levels`]), else on the nearest.
pub fn snap_build(
    passive: &Netlist,
    build: &ActiveBuild,
    choice: &PartsChoice,
    passband_hz: &[[f64; 2]],
    levels: Option<&ConverterLevels>,
) -> Result<SnappedBuild, PartsSnapError> {
    choice.check()?;
    if passband_hz.is_empty() {
        return Err(PartsSnapError::NoPassband);
    }
    let grid = band_grid(passband_hz, PASSBAND_POINTS).map_err(|e| match e {
        CircuitError::BadGrid { from_hz, to_hz, .. } => PartsSnapError::BadPassband {
            low_hz: from_hz,
            high_hz: to_hz,
        },
        other => PartsSnapError::Circuit(other),
    })?;
    let meter = Meter::new(passive, grid)?;
    let deviation = |n: &Netlist| meter.deviation(n);
    let as_built = deviation(&build.netlist)?;
    let converters = converters(&build.stages);
    let (mut netlist, rescaled) = rescale(build, &converters, choice, levels)?;
    let targets: Vec<Vec<f64>> = converters
        .iter()
        .map(|c| c.chains.iter().map(|ch| ch.realized(&netlist)).collect())
        .collect();
    let ideal_values = deviation(&netlist)?;
    let damping: Vec<DampingResistor> = build
        .notes
        .iter()
        .flat_map(|n| match n {
            Note::Damped { resistors, .. } => resistors.clone(),
            _ => Vec::new(),
        })
        .collect();
    let tuning::Procedure {
        steps: mut procedure,
        goals,
        read_by,
    } = tuning::procedure(
        passive,
        &netlist,
        &build.stages,
        &damping,
        &converters
            .iter()
            .map(|c| (c.stage, c.chains))
            .collect::<Vec<_>>(),
    );
    let before_snap = netlist.clone();
    snap_all(&mut netlist, &dc_path_resistors(&build.stages), choice)?;
    check_resistors(passive, &netlist, &build.stages, choice)?;
    let snapped = deviation(&netlist)?;
    let untrimmed = netlist.clone();
    let mut trims = Vec::new();
    for ((c, targets), goals) in converters.iter().zip(&targets).zip(goals) {
        // A resonator's converter follows its partner's snapping (every
        // chain of it, so a floating inductor's two stay matched).
        let follow = goals
            .iter()
            .find_map(|g| match g {
                TrimGoal::Resonance { partner_index, .. } => {
                    Some(value(&before_snap, *partner_index) / value(&netlist, *partner_index))
                }
                TrimGoal::Preset => None,
            })
            .unwrap_or(1.0);
        for ((chain, &target), goal) in c.chains.iter().zip(targets).zip(goals) {
            trims.push(trim::solve(
                &mut netlist,
                c.replaces,
                chain,
                target * follow,
                goal,
                choice,
            )?);
        }
    }
    let trimmed = deviation(&netlist)?;
    tuning::read_steps(&mut procedure, &netlist, &read_by)?;
    Ok(SnappedBuild {
        stages: realized_stages(&netlist, &build.stages, &converters),
        netlist,
        trims,
        procedure,
        untrimmed,
        rescaled,
        error_db: ErrorSteps {
            as_built,
            ideal_values,
            snapped,
            trimmed,
        },
    })
}

/// The designator of the trimmer of trim element `name` ("R_L1_1" ->
/// "RV_L1_1": RV for a variable resistor, common practice; SPICE reads
/// any name starting with R as a resistor).
pub fn trimmer_designator(name: &str) -> String {
    format!("RV{}", name.strip_prefix('R').unwrap_or(name))
}

/// The build as it is soldered: `netlist` (an active on parts build) with
/// every trim element split into its fixed resistor, a series value, and
/// a trimmer at the setting the design computed, in series through a new
/// node. Electrically the same network: the two add up to the solved
/// value.
pub fn soldered(netlist: &Netlist, trims: &[Trim]) -> Result<Netlist, PartsSnapError> {
    let mut built = netlist.clone();
    for t in trims {
        let Some(&Element::Resistor { a, b, .. }) = built.elements.get(t.index) else {
            continue;
        };
        let mid = built.node(&format!("{}_trim", t.element));
        built.elements[t.index] = Element::Resistor {
            name: t.element.clone(),
            a,
            b: mid,
            ohm: t.fixed_ohm,
        };
        built.add(Element::Resistor {
            name: trimmer_designator(&t.element),
            a: mid,
            b,
            ohm: t.setting_ohm,
        })?;
    }
    built.title = format!(
        "{} (as soldered: fixed resistors and trimmers)",
        netlist.title
    );
    Ok(built)
}

/// One converter of a build: its stage, what it replaces, its chains.
struct Converter<'a> {
    stage: usize,
    replaces: &'a str,
    chains: &'a [Chain],
}

/// The converters of a build, in stage order, from their typed handles.
fn converters(stages: &[Stage]) -> Vec<Converter<'_>> {
    stages
        .iter()
        .enumerate()
        .filter_map(|(stage, s)| match &s.handles {
            Handles::Converter(chains) => Some(Converter {
                stage,
                replaces: s.replaces.as_deref().unwrap_or_default(),
                chains,
            }),
            _ => None,
        })
        .collect()
}

/// One capacitor as a rescaling left it.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Moved {
    /// Its designator.
    pub designator: String,
    /// Its value before, farad.
    pub from_f: f64,
    /// Its value after, farad.
    pub to_f: f64,
    /// Whether the value before lay outside the capacitor range.
    pub was_outside_range: bool,
}

/// What one rescaling (steps 1 and 2 of the module documentation) did.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "rescaled", rename_all = "snake_case")]
pub enum Rescale {
    /// Every impedance of the FDNR image times `factor`, so that its
    /// termination capacitors land on series values in range (the voltage
    /// ratios do not change).
    ImageLevel {
        /// The factor on every impedance.
        factor: f64,
        /// The termination capacitors.
        capacitors: Vec<Moved>,
    },
    /// One converter's capacitors placed by its own freedoms; the value it
    /// realizes is unchanged.
    Converter {
        /// The passive element it replaces.
        replaces: String,
        /// Its capacitors.
        capacitors: Vec<Moved>,
        /// The freedoms used.
        moves: Moves,
    },
}

/// Steps 1 and 2: the build's netlist with the image level and every
/// converter's capacitors placed, and what was done.
fn rescale(
    build: &ActiveBuild,
    converters: &[Converter],
    choice: &PartsChoice,
    levels: Option<&ConverterLevels>,
) -> Result<(Netlist, Vec<Rescale>), PartsSnapError> {
    let mut netlist = build.netlist.clone();
    let mut done = Vec::new();
    let terminations = termination_capacitors(&build.stages);
    if !terminations.is_empty() {
        let factor = image_level(&netlist, &terminations, choice)?;
        for index in 0..netlist.elements.len() {
            if matches!(
                netlist.elements[index].kind(),
                ElementKind::Resistor | ElementKind::Capacitor
            ) {
                scale_impedance(&mut netlist, index, factor)?;
            }
        }
        done.push(Rescale::ImageLevel {
            factor,
            capacitors: moved(&build.netlist, &netlist, &terminations, choice),
        });
    }
    check_plain_capacitors(&netlist, &build.stages, converters, choice)?;
    for c in converters {
        let before = netlist.clone();
        let level = |farad| match levels.and_then(|l| l.chosen_f(c.stage)) {
            Some(chosen) => Ok(chosen),
            None => choice.in_range(farad),
        };
        let moves = chain::place(
            c.chains,
            &mut netlist,
            |farad| choice.in_range(farad),
            level,
        )?;
        let mut capacitors: Vec<usize> = Vec::new();
        for i in c.chains.iter().flat_map(|ch| ch.z) {
            if is_capacitor(&netlist, i) && !capacitors.contains(&i) {
                capacitors.push(i);
            }
        }
        done.push(Rescale::Converter {
            replaces: c.replaces.to_string(),
            capacitors: moved(&before, &netlist, &capacitors, choice),
            moves,
        });
    }
    Ok((netlist, done))
}

/// The element indices of the FDNR image's terminations: each
/// capacitor and the DC-path resistor across it.
fn terminations(stages: &[Stage]) -> Vec<(usize, usize)> {
    stages
        .iter()
        .filter_map(|s| match s.handles {
            Handles::Termination { capacitor, dc_path } => Some((capacitor, dc_path)),
            _ => None,
        })
        .collect()
}

/// The FDNR image's termination capacitors.
fn termination_capacitors(stages: &[Stage]) -> Vec<usize> {
    terminations(stages).into_iter().map(|(c, _)| c).collect()
}

/// The FDNR image's DC-path resistors.
fn dc_path_resistors(stages: &[Stage]) -> Vec<usize> {
    terminations(stages).into_iter().map(|(_, r)| r).collect()
}

/// The factor on every impedance of an FDNR image that puts one of its
/// termination capacitors on a series value in range and leaves the
/// others in range with the smallest largest snapping step.
fn image_level(
    netlist: &Netlist,
    capacitors: &[usize],
    choice: &PartsChoice,
) -> Result<f64, PartsSnapError> {
    let mut best: Option<(f64, f64)> = None;
    for &i in capacitors {
        let c = value(netlist, i);
        let level = c / choice.in_range(c)?;
        let mut worst = Some(0.0_f64);
        for &j in capacitors {
            let scaled = value(netlist, j) / level;
            let step = (choice.in_range(scaled)? / scaled).ln().abs();
            worst = worst
                .filter(|_| choice.contains(scaled))
                .map(|w| w.max(step));
        }
        if let Some(w) = worst.filter(|&w| best.is_none_or(|b| w < b.0)) {
            best = Some((w, level));
        }
    }
    best.map(|b| b.1).ok_or_else(|| {
        let values: Vec<f64> = capacitors.iter().map(|&i| value(netlist, i)).collect();
        let max = values.iter().copied().fold(f64::NAN, f64::max);
        let min = values.iter().copied().fold(f64::NAN, f64::min);
        PartsSnapError::TerminationsSpread {
            capacitors: capacitors
                .iter()
                .map(|&i| netlist.elements[i].name().to_string())
                .collect(),
            ratio: max / min,
            low_f: choice.capacitor_range_f.0,
            high_f: choice.capacitor_range_f.1,
        }
    })
}

/// Every capacitor that belongs to no converter must already lie in a
/// range the design file sets: nothing here can rescale it alone.
fn check_plain_capacitors(
    netlist: &Netlist,
    stages: &[Stage],
    converters: &[Converter],
    choice: &PartsChoice,
) -> Result<(), PartsSnapError> {
    let in_converter = |i: usize| {
        converters
            .iter()
            .any(|c| c.chains.iter().any(|ch| ch.z.contains(&i)))
    };
    for (i, e) in netlist.elements.iter().enumerate() {
        let farad = value(netlist, i);
        if !choice.capacitor_range_given
            || !is_capacitor(netlist, i)
            || in_converter(i)
            || choice.contains(farad)
        {
            continue;
        }
        let stage = stages
            .iter()
            .find(|s| s.elements.iter().any(|n| n == e.name()))
            .and_then(|s| s.replaces.clone())
            .unwrap_or_else(|| "ladder".to_string());
        return Err(PartsSnapError::OutOfRange {
            stage,
            element: e.name().to_string(),
            farad,
            low_f: choice.capacitor_range_f.0,
            high_f: choice.capacitor_range_f.1,
            why: "it belongs to no converter, and the terminations set the ladder's impedance level; widen the range, or scale the terminations ([terminations] level = \"free\" chooses them)",
        });
    }
    Ok(())
}

/// Every resistor nocoil chose (not the ladder's own, which the design
/// file or the level choice set, nor an FDNR DC-path resistor, held to
/// its own bound) must lie in a resistor range the design file sets.
fn check_resistors(
    passive: &Netlist,
    netlist: &Netlist,
    stages: &[Stage],
    choice: &PartsChoice,
) -> Result<(), PartsSnapError> {
    if !choice.resistor_range_given {
        return Ok(());
    }
    let (low_ohm, high_ohm) = choice.resistor_range_ohm;
    let dc_paths = dc_path_resistors(stages);
    let ladders_own = |name: &str| passive.elements.iter().any(|e| e.name() == name);
    for (i, e) in netlist.elements.iter().enumerate() {
        let ohm = value(netlist, i);
        if e.kind() != ElementKind::Resistor
            || within(ohm, (low_ohm, high_ohm))
            || dc_paths.contains(&i)
            || ladders_own(e.name())
        {
            continue;
        }
        return Err(PartsSnapError::ResistorOutOfRange {
            element: e.name().to_string(),
            ohm,
            low_ohm,
            high_ohm,
        });
    }
    Ok(())
}

/// Step 3: every resistor to its nearest series value, every capacitor to
/// the nearest series value in range (see `Buying::snap_capacitor`); the
/// DC-path resistors (`dc_paths`) first held within
/// `PartsChoice::dc_path_max_ohm` ([`hold_dc_paths`]), and none snapped
/// above it.
fn snap_all(
    netlist: &mut Netlist,
    dc_paths: &[usize],
    choice: &PartsChoice,
) -> Result<(), PartsSnapError> {
    let bound = choice.dc_path_max_ohm;
    hold_dc_paths(netlist, dc_paths, bound)?;
    for index in 0..netlist.elements.len() {
        let v = value(netlist, index);
        let snap = |cause| PartsSnapError::Snap {
            element: netlist.elements[index].name().to_string(),
            cause,
        };
        let snapped = match netlist.elements[index].kind() {
            ElementKind::Resistor => match choice.resistor_series.nearest(v).map_err(snap)? {
                near if near > bound && dc_paths.contains(&index) => {
                    choice.resistor_series.snap_down(bound).map_err(snap)?
                }
                near => near,
            },
            ElementKind::Capacitor => choice.snap_capacitor(v)?,
            _ => continue,
        };
        netlist.set_value(index, snapped)?;
    }
    Ok(())
}

/// Scales the FDNR image's DC-path resistors `dc_paths` together into
/// `bound` when the image level put the larger above it (a 2 Hz FDNR
/// lowpass whose termination capacitors rose to 1 uF would have wanted
/// 800 Mohm), then sets the source side's (the one at `in`) so that the
/// DC gain is what it was: with the image's own DC resistance Rser
/// between them, V(out)/V(in) = Rb / (Ra + Rser + Rb), so Ra moves by Rb
/// (1/h before - 1/h after), one DC solve each side.
fn hold_dc_paths(
    netlist: &mut Netlist,
    dc_paths: &[usize],
    bound: f64,
) -> Result<(), PartsSnapError> {
    let largest = dc_paths
        .iter()
        .map(|&i| value(netlist, i))
        .fold(0.0, f64::max);
    if largest <= bound {
        return Ok(());
    }
    let inp = netlist.require_node("in")?;
    let out = netlist.require_node("out")?;
    let dc_gain = |n: &Netlist| -> Result<f64, CircuitError> {
        Ok(AcSystem::new(n)?.transfer(0.0, out, inp)?.re)
    };
    let before = dc_gain(netlist)?;
    for &i in dc_paths {
        netlist.set_value(i, value(netlist, i) * bound / largest)?;
    }
    let after = dc_gain(netlist)?;
    let touches_in = |i: usize| netlist.elements[i].terminals().iter().any(|t| t.0 == inp);
    let (Some(&ra), Some(&rb)) = (
        dc_paths.iter().find(|&&i| touches_in(i)),
        dc_paths.iter().find(|&&i| !touches_in(i)),
    ) else {
        return Ok(());
    };
    let held = value(netlist, ra) + value(netlist, rb) * (1.0 / before - 1.0 / after);
    netlist.set_value(ra, held)?;
    Ok(())
}

/// The stages with the values `netlist` realizes: a converter's from its
/// first chain, any other stage's from its first element.
fn realized_stages(netlist: &Netlist, stages: &[Stage], converters: &[Converter]) -> Vec<Stage> {
    let mut out = stages.to_vec();
    for stage in &mut out {
        let first = match stage.handles {
            Handles::Termination { capacitor, .. } => Some(capacitor),
            Handles::Element(index) => Some(index),
            Handles::Converter(_) | Handles::Buffer => None,
        };
        if let Some(i) = first {
            stage.value = value(netlist, i);
        }
    }
    for c in converters {
        if let Some(first) = c.chains.first() {
            out[c.stage].value = first.realized(netlist);
        }
    }
    out
}

/// The capacitors `indices` from `before` to `after`.
fn moved(before: &Netlist, after: &Netlist, indices: &[usize], choice: &PartsChoice) -> Vec<Moved> {
    indices
        .iter()
        .map(|&i| Moved {
            designator: after.elements[i].name().to_string(),
            from_f: value(before, i),
            to_f: value(after, i),
            was_outside_range: !choice.contains(value(before, i)),
        })
        .collect()
}
