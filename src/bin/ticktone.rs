//! `ticktone`: host tools for the ticktone modulator.
//!
//! `ticktone measure` runs a test tone through the firmware path (or the
//! exact model with `--exact`), rebuilds the switched output from the
//! compare values and prints the audio trade's figures.

use std::process::ExitCode;

use clap::{Args, Parser, Subcommand, ValueEnum};
use serde_json::{json, Value};
use ticktone::lab::exact::ExactSampling;
use ticktone::lab::metrics::Metrics;
use ticktone::lab::run::{measure, LabSpec, Report};
use ticktone::lab::units::{parse_db, parse_hz, parse_seconds};
use ticktone::lab::wave::DeadNode;
use ticktone::lab::{plot, SAFETY_CAUTION};
use ticktone::ntf::NtfPoles;
use ticktone::{
    BridgeKind, BridgeSpec, Counting, DeadTimeForm, Edge, ShaperSpec, Timer, TimerSpec,
    UpdateScheme,
};

#[derive(Parser, Debug)]
#[command(name = "ticktone", version, about = "Host tools for the ticktone PWM modulator", after_help = SAFETY_CAUTION)]
struct Cli {
    #[command(subcommand)]
    cmd: Cmd,
}

#[derive(Subcommand, Debug)]
enum Cmd {
    /// Run a test tone through the modulator, rebuild the switched output
    /// from the compare values and measure it (AES17 conventions).
    #[command(after_help = SAFETY_CAUTION)]
    Measure(MeasureArgs),
    /// Choose timer clock, carrier, counting mode, update scheme and
    /// noise-shaper order for a target in-band SNR, with the input rate
    /// locked to the update rate.
    #[command(after_help = SAFETY_CAUTION)]
    Plan(PlanArgs),
}

#[derive(Args, Debug)]
struct PlanArgs {
    /// Input sample rate.
    #[arg(long, default_value = "48kHz", value_parser = parse_hz)]
    rate: f64,
    /// Timer clock the part can run at (repeat for several).
    #[arg(long, default_values = ["98.304MHz"], value_parser = parse_hz)]
    clock: Vec<f64>,
    /// Lowest carrier to consider.
    #[arg(long, default_value = "200kHz", value_parser = parse_hz)]
    carrier_min: f64,
    /// Highest carrier to consider (switching losses grow with it).
    #[arg(long, default_value = "800kHz", value_parser = parse_hz)]
    carrier_max: f64,
    /// Audio band edge.
    #[arg(long, default_value = "20kHz", value_parser = parse_hz)]
    band: f64,
    /// In-band SNR to reach, dB.
    #[arg(long, default_value_t = 110.0)]
    snr: f64,
    /// Bridge.
    #[arg(long, value_enum, default_value = "full3")]
    bridge: BridgeArg,
    /// Highest noise-shaper order to consider.
    #[arg(long, default_value_t = 5)]
    max_order: u8,
    /// Rows to show.
    #[arg(long, default_value_t = 12)]
    rows: usize,
    /// Measure the first N rows with the lab (natural sampling, 997 Hz at
    /// -1 dBFS, 0.5 s records).
    #[arg(long, default_value_t = 0)]
    verify: usize,
}

fn run_plan(a: &PlanArgs) -> Result<(), String> {
    let bridge = match a.bridge {
        BridgeArg::Half => BridgeKind::Half,
        BridgeArg::Full2 => BridgeKind::Full2,
        BridgeArg::Full3 => BridgeKind::Full3,
    };
    let spec = ticktone::plan::PlanSpec {
        input_rate_hz: a.rate,
        clocks_hz: a.clock.clone(),
        carrier_min_hz: a.carrier_min,
        carrier_max_hz: a.carrier_max,
        band_hz: a.band,
        target_snr_db: a.snr,
        bridge,
        max_order: a.max_order,
    };
    let rows = ticktone::plan::plan(&spec).map_err(|e| e.to_string())?;
    let mut out = ticktone::plan::table(&spec, &rows, a.rows);
    if a.verify > 0 {
        out.push_str("\n  measured by the lab (natural sampling, 997 Hz at -1 dBFS):\n");
    }
    for c in rows.iter().take(a.verify) {
        let mut lab = LabSpec::reference();
        lab.timer = c.timer_spec();
        lab.bridge = BridgeSpec::ideal(bridge);
        lab.input_rate_hz = a.rate;
        lab.sampling = ExactSampling::Natural;
        lab.shaper = ticktone::plan::shaper(c.order);
        lab.record_s = 0.5;
        lab.bandwidth_hz = a.band;
        let (_, _, m) = ticktone::lab::run::measure_once(&lab).map_err(|e| e.to_string())?;
        out.push_str(&format!(
            "  {:>10.4} MHz {:>9.3} kHz order {}: SNR {:.1} dB (predicted {:.1}), THD+N {:.1} dB\n",
            c.clock_hz / 1e6,
            c.carrier_hz / 1e3,
            c.order,
            m.snr_db,
            c.predicted_snr_db,
            m.thdn_db
        ));
    }
    out.push('\n');
    out.push_str(SAFETY_CAUTION);
    out.push('\n');
    emit(&out);
    Ok(())
}

#[derive(Clone, Copy, Debug, ValueEnum)]
enum CountingArg {
    Up,
    Updown,
}

#[derive(Clone, Copy, Debug, ValueEnum)]
enum EdgeArg {
    Trailing,
    Leading,
    Double,
}

#[derive(Clone, Copy, Debug, ValueEnum)]
enum UpdateArg {
    Single,
    Double,
}

#[derive(Clone, Copy, Debug, ValueEnum)]
enum PolesArg {
    None,
    Sum4,
    Sum8,
    Sum12,
}

#[derive(Clone, Copy, Debug, ValueEnum)]
enum SamplingArg {
    Uniform,
    Natural,
}

#[derive(Clone, Copy, Debug, ValueEnum)]
enum BridgeArg {
    Half,
    Full2,
    Full3,
}

#[derive(Clone, Copy, Debug, ValueEnum)]
enum DeadFormArg {
    /// The timer's dead-time generator (one compare a leg).
    Generator,
    /// Separate high-side and low-side compare values (up/down only).
    Separate,
}

#[derive(Clone, Copy, Debug, ValueEnum)]
enum DeadNodeArg {
    /// Ideal: the node commutates mid-way through the dead interval.
    Mid,
    /// Current out of the leg: the node sits low while both switches are off.
    Low,
    /// Current into the leg: the node sits high while both switches are off.
    High,
}

#[derive(Args, Debug)]
struct MeasureArgs {
    /// Timer clock (e.g. 98.304MHz).
    #[arg(long, default_value = "98.304MHz", value_parser = parse_hz)]
    clock: f64,
    /// PWM carrier (switching frequency).
    #[arg(long, default_value = "384kHz", value_parser = parse_hz)]
    carrier: f64,
    /// Input sample rate of the firmware path.
    #[arg(long, default_value = "48kHz", value_parser = parse_hz)]
    rate: f64,
    /// Counter mode [default: the one the edge needs].
    #[arg(long, value_enum)]
    counting: Option<CountingArg>,
    /// Modulated edge(s).
    #[arg(long, value_enum, default_value = "double")]
    edge: EdgeArg,
    /// Compare updates a period [default: double for up/down, single for up].
    #[arg(long, value_enum)]
    update: Option<UpdateArg>,
    /// Edge sampling.
    #[arg(long, value_enum, default_value = "natural")]
    sampling: SamplingArg,
    /// Noise-shaper order (0 = plain rounding).
    #[arg(long, default_value_t = 5)]
    shaper: u8,
    /// Noise-shaper zeros at half the update rate [default: 3 for a half
    /// bridge or 2-level full bridge with two updates a period, else 0].
    #[arg(long)]
    half_rate_zeros: Option<u8>,
    /// Noise-shaper poles: none (FIR) or a bound on sum|h| (headroom).
    #[arg(long, value_enum, default_value = "sum8")]
    poles: PolesArg,
    /// TPDF dither before rounding.
    #[arg(long)]
    dither: bool,
    /// Bridge.
    #[arg(long, value_enum, default_value = "full3")]
    bridge: BridgeArg,
    /// Dead time (e.g. 20ns), rounded up to whole ticks.
    #[arg(long, default_value = "0ns", value_parser = parse_seconds)]
    dead_time: f64,
    /// Where the dead time is made.
    #[arg(long, value_enum, default_value = "generator")]
    dead_form: DeadFormArg,
    /// Switch node while both switches are off.
    #[arg(long, value_enum, default_value = "mid")]
    dead_node: DeadNodeArg,
    /// Test tone (moved to the nearest coherent frequency; the one used is reported).
    #[arg(long, default_value = "997Hz", value_parser = parse_hz)]
    tone: f64,
    /// Tone peak in dBFS (0 dBFS = modulation index 1).
    #[arg(long, default_value = "-1", allow_hyphen_values = true, value_parser = parse_db)]
    level: f64,
    /// Record length.
    #[arg(long, default_value = "1s", value_parser = parse_seconds)]
    record: f64,
    /// Upper edge of the measurement band.
    #[arg(long, default_value = "20kHz", value_parser = parse_hz)]
    band: f64,
    /// Use the exact f64 model (analytic tone, unrounded edges) instead of the firmware path.
    #[arg(long)]
    exact: bool,
    /// Print one JSON object instead of the table.
    #[arg(long)]
    json: bool,
    /// Write the spectrum (0 to 2.5 carrier harmonics, and the audio band) to this SVG file.
    #[arg(long, value_name = "FILE.svg")]
    plot: Option<String>,
}

fn spec_from(a: &MeasureArgs) -> Result<LabSpec, String> {
    let edge = match a.edge {
        EdgeArg::Trailing => Edge::Trailing,
        EdgeArg::Leading => Edge::Leading,
        EdgeArg::Double => Edge::Double,
    };
    let counting = match a.counting {
        None => edge.counting(),
        Some(CountingArg::Up) => Counting::Up,
        Some(CountingArg::Updown) => Counting::UpDown,
    };
    let update = match (a.update, counting) {
        (Some(UpdateArg::Single), _) | (None, Counting::Up) => UpdateScheme::Single,
        (Some(UpdateArg::Double), _) | (None, Counting::UpDown) => UpdateScheme::Double,
    };
    let timer = TimerSpec {
        counting,
        edge,
        update,
        ..TimerSpec::new(a.clock, a.carrier)
    };
    let t = Timer::try_new(timer).map_err(|e| e.to_string())?;
    let kind = match a.bridge {
        BridgeArg::Half => BridgeKind::Half,
        BridgeArg::Full2 => BridgeKind::Full2,
        BridgeArg::Full3 => BridgeKind::Full3,
    };
    let form = match a.dead_form {
        DeadFormArg::Generator => DeadTimeForm::Generator,
        DeadFormArg::Separate => DeadTimeForm::SeparateCompares,
    };
    let bridge = BridgeSpec {
        dead_time_ticks: t
            .ticks_from_ns(a.dead_time * 1e9)
            .map_err(|e| e.to_string())?,
        form,
        ..BridgeSpec::ideal(kind)
    };
    Ok(LabSpec {
        timer,
        bridge,
        input_rate_hz: a.rate,
        sampling: match a.sampling {
            SamplingArg::Uniform => ExactSampling::Uniform,
            SamplingArg::Natural => ExactSampling::Natural,
        },
        shaper: if a.shaper == 0 {
            ShaperSpec::ROUND.with_dither(a.dither)
        } else {
            let mixing = kind != BridgeKind::Full3 && t.update() == UpdateScheme::Double;
            ShaperSpec::new(a.shaper)
                .with_dither(a.dither)
                .with_half_rate_zeros(a.half_rate_zeros.unwrap_or(if mixing { 3 } else { 0 }))
                .with_poles(match a.poles {
                    PolesArg::None => NtfPoles::None,
                    PolesArg::Sum4 => NtfPoles::Sum4,
                    PolesArg::Sum8 => NtfPoles::Sum8,
                    PolesArg::Sum12 => NtfPoles::Sum12,
                })
        },
        tone_hz: a.tone,
        level_dbfs: a.level,
        record_s: a.record,
        bandwidth_hz: a.band,
        exact: a.exact,
        dead_node: match a.dead_node {
            DeadNodeArg::Mid => DeadNode::Midpoint,
            DeadNodeArg::Low => DeadNode::Low,
            DeadNodeArg::High => DeadNode::High,
        },
    })
}

fn scenario(spec: &LabSpec, r: &Report) -> Value {
    let t = &r.rendered.timer;
    json!({
        "mode": if spec.exact { "exact" } else { "firmware" },
        "clock_hz": t.clock_hz(),
        "carrier_hz": t.carrier_hz(),
        "period_ticks": t.period_ticks(),
        "counting": format!("{:?}", t.counting()),
        "edge": format!("{:?}", t.edge()),
        "update": format!("{:?}", t.update()),
        "input_rate_hz": if spec.exact { Value::Null } else { json!(spec.input_rate_hz) },
        "sampling": format!("{:?}", spec.sampling),
        "shaper_order": spec.shaper.order,
        "dither": spec.shaper.dither,
        "bridge": format!("{:?}", spec.bridge.kind),
        "dead_time_ticks": spec.bridge.dead_time_ticks,
        "dead_time_form": format!("{:?}", spec.bridge.form),
        "dead_node": format!("{:?}", spec.dead_node),
        "tone_requested_hz": spec.tone_hz,
        "level_requested_dbfs": spec.level_dbfs,
        "record_s": r.rendered.plan.record_s,
        "record_periods": r.rendered.plan.periods,
        "tone_cycles": r.rendered.plan.cycles,
    })
}

/// `writeln!` into a String (cannot fail).
macro_rules! line {
    ($o:expr) => {
        $o.push('\n')
    };
    ($o:expr, $($t:tt)*) => {{
        use std::fmt::Write as _;
        let _ = writeln!($o, $($t)*);
    }};
}

fn table(spec: &LabSpec, r: &Report) -> String {
    let mut o = String::new();
    let t = &r.rendered.timer;
    let m: &Metrics = &r.metrics;
    let p = &r.rendered.plan;
    line!(
        o,
        "ticktone measure: {}",
        if spec.exact {
            "exact model (analytic tone, unrounded edges)"
        } else {
            "firmware path (compare values rebuilt to the tick)"
        }
    );
    line!(o,
        "  timer        {:.6} MHz clock, {:.3} kHz carrier, {} ticks a period, {:?} counting, {:?} edge, {:?} update",
        t.clock_hz() / 1e6,
        t.carrier_hz() / 1e3,
        t.period_ticks(),
        t.counting(),
        t.edge(),
        t.update()
    );
    line!(
        o,
        "  bridge       {:?}, dead time {} ticks ({:?}), node in dead time {:?}",
        spec.bridge.kind,
        spec.bridge.dead_time_ticks,
        spec.bridge.form,
        spec.dead_node
    );
    if !spec.exact {
        line!(
            o,
            "  input        {:.3} kHz, {:?} sampling, shaper order {}{}",
            spec.input_rate_hz / 1e3,
            spec.sampling,
            spec.shaper.order,
            if spec.shaper.dither {
                ", TPDF dither"
            } else {
                ""
            }
        );
    } else {
        line!(o, "  sampling     {:?} (exact)", spec.sampling);
    }
    line!(
        o,
        "  record       {:.6} s ({} periods, {} tone cycles, bin {:.3} Hz)",
        p.record_s,
        p.periods,
        p.cycles,
        m.bin_hz
    );
    line!(o);
    line!(o, "  {:<22} {:>14} {:>14}", "figure", "value", "at");
    line!(
        o,
        "  {:<22} {:>10.4} dBFS {:>11.4} Hz",
        "fundamental",
        m.fundamental_dbfs,
        m.fundamental_hz
    );
    for h in &m.harmonics {
        line!(
            o,
            "  {:<22} {:>11.2} dBc {:>11.4} Hz",
            format!("harmonic {}", h.order),
            h.dbc,
            h.hz
        );
    }
    line!(
        o,
        "  {:<22} {:>12.2} dB  ({:.5} %)",
        "THD",
        m.thd_db,
        m.thd_pct
    );
    line!(
        o,
        "  {:<22} {:>12.2} dB  ({:.5} %)",
        "THD+N",
        m.thdn_db,
        m.thdn_pct
    );
    line!(o, "  {:<22} {:>12.2} dB", "THD+N, A-weighted", m.thdn_a_db);
    line!(o, "  {:<22} {:>12.2} dB", "SNR (re full scale)", m.snr_db);
    line!(o, "  {:<22} {:>12.2} dB", "SNR, A-weighted", m.snr_a_db);
    match r.dynamic_range_db {
        Some(dr) => line!(o,
            "  {:<22} {:>12.2} dB  (AES17, -60 dBFS, A-weighted)",
            "dynamic range", dr
        ),
        None => line!(o,
            "  {:<22} {:>12}     (the -60 dBFS tone did not come through: dead zone of undithered rounding?)",
            "dynamic range", "n/a"
        ),
    }
    line!(
        o,
        "  {:<22} {:.1} Hz to {:.1} Hz; aliasing below {:.0} dBFS (proven bound)",
        "band",
        m.band_low_hz,
        m.bandwidth_hz,
        m.alias_bound_dbfs
    );
    if let Some(c) = r.rendered.counters {
        line!(
            o,
            "  {:<22} input {}, low {}, high {}",
            "clamped updates",
            c.input_clamped,
            c.low_clamped,
            c.high_clamped
        );
    }
    line!(o);
    line!(o, "{SAFETY_CAUTION}");
    o
}

/// Write to stdout; a closed pipe (`| head`) is not an error.
fn emit(text: &str) {
    use std::io::Write as _;
    let _ = std::io::stdout().lock().write_all(text.as_bytes());
}

fn run(a: &MeasureArgs) -> Result<(), String> {
    let spec = spec_from(a)?;
    let report = measure(&spec).map_err(|e| e.to_string())?;
    if let Some(path) = &a.plot {
        let wide = plot::wideband(&report.rendered);
        let title = format!(
            "{} tone {:.3} Hz at {:.2} dBFS",
            if spec.exact {
                "exact model,"
            } else {
                "firmware path,"
            },
            report.metrics.fundamental_hz,
            report.metrics.fundamental_dbfs
        );
        plot::write_svg(
            path,
            &title,
            &wide,
            &report.spectrum,
            report.rendered.timer.carrier_hz(),
            spec.bandwidth_hz,
        )?;
    }
    if a.json {
        let mut v = serde_json::to_value(&report.metrics).map_err(|e| e.to_string())?;
        if let Value::Object(map) = &mut v {
            map.insert("dynamic_range_db".into(), json!(report.dynamic_range_db));
            if let Some(c) = report.rendered.counters {
                map.insert(
                    "clamped".into(),
                    json!({"input": c.input_clamped, "low": c.low_clamped, "high": c.high_clamped}),
                );
            }
            map.insert("scenario".into(), scenario(&spec, &report));
            map.insert("caution".into(), json!(SAFETY_CAUTION));
        }
        let text = serde_json::to_string_pretty(&v).map_err(|e| e.to_string())?;
        emit(&(text + "\n"));
    } else {
        emit(&table(&spec, &report));
    }
    Ok(())
}

fn main() -> ExitCode {
    let (name, result) = match Cli::parse().cmd {
        Cmd::Measure(a) => ("measure", run(&a)),
        Cmd::Plan(a) => ("plan", run_plan(&a)),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            // Configuration refused: say why, and the caution, on stderr.
            eprintln!("ticktone {name}: {e}");
            eprintln!("{SAFETY_CAUTION}");
            ExitCode::from(2)
        }
    }
}
