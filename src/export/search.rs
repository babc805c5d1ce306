//! A design for yield in words and as a table: the margins the ladder
//! was synthesized with, the search's outcome and what to change when it
//! falls short, and every candidate tried.

use super::eng::format_trimmed as eng;
use super::html::Table;
use super::prose::{and_list, db, edge_loss_name, or_list};
use crate::design::{Build, CandidateResult, Margins, Report, ToleranceChange, YieldSearch};

/// A fraction as a percentage with two decimals, and its 95 % interval.
fn yield_words(fraction: f64, interval: [f64; 2]) -> String {
    format!(
        "{:.2} % (95 % interval {:.1} % to {:.1} %)",
        100.0 * fraction,
        100.0 * interval[0],
        100.0 * interval[1]
    )
}

/// A fraction as a percentage the way a part or a target is written:
/// "0.5 %", "99 %" (to 0.001 %, trailing zeros dropped).
pub(super) fn percent(x: f64) -> String {
    let digits = format!("{:.3}", 100.0 * x);
    format!("{} %", digits.trim_end_matches('0').trim_end_matches('.'))
}

/// The margins inside the specification the ladder was synthesized
/// with, in words; `None` for a ladder synthesized for the specification
/// itself.
pub fn margins_words(r: &Report) -> Option<String> {
    let m = &r.margins;
    if *m == Margins::NONE {
        return None;
    }
    let mut parts = Vec::new();
    if m.passband_ripple_db > 0.0 {
        parts.push(format!(
            "{} {} dB ({} dB inside the specification's)",
            edge_loss_name(r.family),
            db(r.passband_ripple_db - m.passband_ripple_db),
            db(m.passband_ripple_db)
        ));
    }
    if let Some(a) = r
        .stopband_attenuation_db
        .filter(|_| m.stopband_attenuation_db > 0.0)
    {
        parts.push(format!(
            "stopband floor {} dB ({} dB deeper)",
            db(a + m.stopband_attenuation_db),
            db(m.stopband_attenuation_db)
        ));
    }
    if m.edge_scale != 1.0 {
        let edges: Vec<String> = r
            .band
            .frequencies_hz(m.edge_scale)
            .into_iter()
            .map(|f| eng(f, "Hz"))
            .collect();
        parts.push(format!(
            "passband edge put at {} (pre-widened)",
            edges.join(" and ")
        ));
    }
    Some(format!("synthesized for {}", and_list(&parts)))
}

/// What to do next when a design without a `[yield]` table yields below
/// 99 % of boards (a family's: a prototype table fixes its ladder):
/// `None` otherwise.
pub fn next_step_words(r: &Report) -> Option<String> {
    let o = r.outcome.as_ref()?;
    let open = r.yield_search.is_none() && r.family.is_some() && o.yield_fraction < 0.99;
    open.then(|| {
        format!(
            "{}: to raise the yield, a [yield] table (target = 0.99) lets nocoil choose the order and the margins inside the specification, and name the tolerances that reach it",
            Build::ActiveOnParts
        )
    })
}

/// A tolerance change in words: "ladder capacitors at 0.5 %: 99.40 %
/// (95 % interval ...)".
fn change_words(c: &ToleranceChange) -> String {
    let class = c.class.map_or(
        "every part (those already tighter keeping theirs)".to_string(),
        |class| class.to_string(),
    );
    format!(
        "{class} at {}: {}",
        percent(c.tolerance),
        yield_words(c.yield_fraction, c.yield_interval_95)
    )
}

/// The design for yield's outcome in one line: the target, what was
/// delivered, and when the target is not reached, the tolerance changes
/// that reach it on the same boards (or that no tolerance alone does,
/// and what else to try).
pub fn search_words(s: &YieldSearch) -> String {
    let c = s.chosen();
    let count =
        |f: fn(&CandidateResult) -> bool| s.candidates.iter().filter(|c| f(&c.result)).count();
    let measured = count(|r| matches!(r, CandidateResult::Measured { .. }));
    let refused = count(|r| matches!(r, CandidateResult::Refused { .. }));
    let outnumbered = count(|r| matches!(r, CandidateResult::Outnumbered { .. }));
    let tried = format!(
        "{} candidates: {measured} with boards drawn, {outnumbered} left undrawn for more op-amps or parts, {refused} refused; every one in report.json",
        s.candidates.len()
    );
    let target = percent(s.goal.target);
    let CandidateResult::Measured {
        opamps,
        yield_fraction,
        yield_interval_95,
        nominal_margin_db,
        ..
    } = c.result
    else {
        return format!(
            "design for yield ({}): {target} asked; {tried}",
            Build::ActiveOnParts
        );
    };
    let delivered = format!(
        "order {} (searched from {}), {opamps} op-amps: {}{}",
        c.order,
        s.minimum_order,
        yield_words(yield_fraction, yield_interval_95),
        if s.tuned { " after tuning" } else { "" }
    );
    if s.reached {
        return format!(
            "design for yield ({}): {target} of boards asked, reached by {delivered} ({tried})",
            Build::ActiveOnParts
        );
    }
    let top = s.minimum_order + s.goal.max_extra_order;
    let reaching: Vec<String> = s
        .tolerance_changes
        .iter()
        .filter(|c| c.reaches_target)
        .map(change_words)
        .collect();
    // A board of nominal parts that already fails is the preferred
    // values' doing, which no tolerance changes.
    let nominal = match nominal_margin_db < 0.0 {
        true => "; its board of nominal parts already fails the specification (the preferred values' steps: a finer series is the first change)",
        false => "",
    };
    let next = if reaching.is_empty() {
        let tried: Vec<String> = s.tolerance_changes.iter().map(change_words).collect();
        format!(
            "no tolerance down to 0.1 % reaches it ({}); a faster op-amp, a wider yield.max_extra_order or a looser specification may",
            and_list(&tried)
        )
    } else {
        format!(
            "on the same boards it is reached with {}",
            or_list(&reaching)
        )
    };
    format!(
        "design for yield ({}): {target} of boards asked and not reached by any candidate up to order {top}; delivered the highest yield, {delivered}{nominal}; {next} ({tried})",
        Build::ActiveOnParts
    )
}

/// Every candidate of a design for yield, in the order tried.
pub fn search_table(s: &YieldSearch) -> Table {
    let rows = s
        .candidates
        .iter()
        .enumerate()
        .map(|(i, c)| {
            let m = &c.margins;
            let mut row = vec![
                c.order.to_string(),
                db(m.passband_ripple_db),
                db(m.stopband_attenuation_db),
                format!("{:.2} %", 100.0 * (m.edge_scale - 1.0)),
            ];
            row.extend(match &c.result {
                CandidateResult::Measured {
                    opamps,
                    parts,
                    nominal_margin_db,
                    boards,
                    yield_fraction,
                    yield_interval_95,
                    ..
                } => vec![
                    opamps.to_string(),
                    parts.to_string(),
                    db(*nominal_margin_db),
                    format!(
                        "{} of {boards} boards",
                        yield_words(*yield_fraction, *yield_interval_95)
                    ),
                ],
                CandidateResult::Outnumbered { opamps, parts } => vec![
                    opamps.to_string(),
                    parts.to_string(),
                    String::new(),
                    "not drawn: more op-amps or parts than one that reaches the target".to_string(),
                ],
                CandidateResult::Refused { why } => {
                    vec![
                        String::new(),
                        String::new(),
                        String::new(),
                        format!("refused: {why}"),
                    ]
                }
            });
            row.push(if i == s.chosen { "delivered" } else { "" }.to_string());
            row
        })
        .collect();
    Table {
        caption: format!(
            "Design for yield: every candidate tried, its boards drawn with seed {} (the same boards for every candidate, the first of them only where those already rule the target out) and tuned where the procedure has steps; the {} build's nominal margin against the specification",
            s.seed,
            Build::ActiveOnParts
        ),
        header: [
            "order",
            "ripple (or edge loss) inside, dB",
            "floor deeper, dB",
            "edge pre-widened",
            "op-amps",
            "parts",
            "nominal margin, dB",
            "yield",
            "choice",
        ]
        .map(String::from)
        .to_vec(),
        rows,
    }
}
