//! Memory bandwidth of this machine (a STREAM-like triad `a = b + s·c` over three arrays far
//! larger than the caches) with 1 and 2 threads, and one IMEX BDF2 step against the bound
//! that bandwidth puts on its two triangular solves.
//!
//! The triad moves 24 bytes per element (two reads, one write; write-allocate traffic not
//! counted, as in STREAM). The bound of a step: an `LDLᵀ` solve reads every nonzero of `L`
//! (its lower triangle with the diagonal, which holds `D`) twice (forward and backward
//! substitution), 8 bytes each (faer's supernodal factor stores row indices per supernode,
//! not per entry, so they are left out; the unused upper triangles of the supernodes'
//! diagonal blocks are not counted either), so `t_min = 2 · 8 · nnz(L) / bandwidth`; the
//! ratio measured step time / `t_min` says how close the step comes to streaming its factor.
//! The step is the channel problem of the `step` bench (`[0, 4] × [0, 1]`, Re = 100 on the
//! height), default n = 130 (about 610k unknowns).
//!
//! This machine's bandwidth drifts within seconds, so besides the ratios against the
//! separately measured medians, every timed step follows one two-thread triad pass and is
//! divided by the bound of that pass; the median and quartiles of those paired ratios are
//! printed last.
//!
//! Run: `cargo bench --bench bandwidth`; `CORNERFLOW_BENCH_TRIAD_MB=<MB per array>` (default
//! 320), `CORNERFLOW_BENCH_STEP_CELLS=<n>` (0 skips the step).
//!
//! # References
//! J.D. McCalpin, *Memory bandwidth and machine balance in current high performance
//! computers*, IEEE TCCA Newsletter, Dec. 1995 (the STREAM kernels; from memory).

use std::hint::black_box;
use std::time::Instant;

use cornerflow::case::{BoundaryCondition, ScalarExpr};
use cornerflow::fem::ViscousForm;
use cornerflow::mesh::structured::rectangle;
use cornerflow::solver::{ImexParams, ImexStepper, UnsteadyProblem};
use rayon::prelude::*;

const REPEATS: usize = 10;
/// Timed IMEX steps (each paired with a triad pass); odd, so the median is one of them.
const STEP_REPEATS: usize = 21;

fn env_usize(name: &str, default: usize) -> usize {
    std::env::var(name).ok().and_then(|v| v.parse().ok()).unwrap_or(default)
}

/// Three arrays of a triad, first touched by the threads of the pool that streams them.
struct TriadArrays {
    a: Vec<f64>,
    b: Vec<f64>,
    c: Vec<f64>,
}

impl TriadArrays {
    fn new(n: usize) -> Self {
        let mut a = vec![0.0f64; n];
        a.par_chunks_mut(TRIAD_CHUNK).for_each(|x| x.iter_mut().for_each(|v| *v = 0.5));
        TriadArrays { a, b: vec![1.0; n], c: vec![2.0; n] }
    }

    /// One pass of `a = b + s·c` on the current pool; its bandwidth in GB/s.
    fn pass(&mut self) -> f64 {
        let s = black_box(3.0);
        let t = Instant::now();
        self.a
            .par_chunks_mut(TRIAD_CHUNK)
            .zip(self.b.par_chunks(TRIAD_CHUNK).zip(self.c.par_chunks(TRIAD_CHUNK)))
            .for_each(|(a, (b, c))| {
                a.iter_mut().zip(b.iter().zip(c)).for_each(|(a, (b, c))| *a = b + s * c)
            });
        black_box(&self.a);
        24.0 * self.a.len() as f64 / t.elapsed().as_secs_f64() / 1e9
    }
}

/// Elements per rayon task of a triad pass.
const TRIAD_CHUNK: usize = 1 << 16;

/// Median and best triad bandwidth in GB/s over `REPEATS` passes with `threads` threads.
fn triad(n: usize, threads: usize) -> (f64, f64) {
    let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().expect("pool");
    pool.install(|| {
        let mut arrays = TriadArrays::new(n);
        let mut rates: Vec<f64> = (0..REPEATS).map(|_| arrays.pass()).collect();
        rates.sort_by(f64::total_cmp);
        (rates[REPEATS / 2], rates[REPEATS - 1])
    })
}

fn channel_conditions() -> Vec<BoundaryCondition> {
    let inflow = BoundaryCondition::Velocity {
        ux: ScalarExpr::parse("4*y*(1-y)").expect("valid expression"),
        uy: ScalarExpr::constant(0.0),
    };
    vec![BoundaryCondition::NoSlip, BoundaryCondition::Outflow, BoundaryCondition::NoSlip, inflow]
}

/// What [`imex_step`] measured.
struct StepMeasurement {
    unknowns: usize,
    l_entries: usize,
    /// Median wall time of one BDF2 step.
    step: f64,
    /// Lower quartile, median and upper quartile over the steps of step time / bound, each
    /// step against the two-thread triad pass run just before it (the machine's bandwidth
    /// drifts within seconds).
    paired_ratio: [f64; 3],
    /// Median bandwidth of those passes (GB/s).
    paired_bandwidth: f64,
    /// Mean time per step in the right-hand side and in the solve (stepper's own timings).
    rhs: f64,
    solve: f64,
    refinement_steps: usize,
}

/// One BDF2 step of the channel problem with `4n × n` cells; each timed step follows a
/// triad pass over `triad_len`-element arrays on rayon's global pool.
fn imex_step(n: usize, triad_len: usize) -> StepMeasurement {
    let mesh = rectangle([0.0, 0.0], [4.0, 1.0], 4 * n, n, |_, _| [0.0, 0.0]).expect("valid mesh");
    let conditions = channel_conditions();
    let problem = UnsteadyProblem {
        viscosity: 0.01,
        conditions: &conditions,
        body_force: None,
        viscous_form: ViscousForm::Gradient,
        convection: true,
    };
    let mut stepper =
        ImexStepper::new(&mesh, problem, ImexParams::new(0.2 / n as f64)).expect("stepper");
    for _ in 0..2 {
        stepper.step().expect("first steps");
    }
    let bytes = 2.0 * 8.0 * stepper.factor_nonzeros().unwrap_or(0) as f64;
    let mut arrays = TriadArrays::new(triad_len);
    let mut refinement = 0;
    let mut ratios = Vec::with_capacity(STEP_REPEATS);
    let mut rates = Vec::with_capacity(STEP_REPEATS);
    let mut times = Vec::with_capacity(STEP_REPEATS);
    let mut spent = (std::time::Duration::ZERO, std::time::Duration::ZERO);
    for _ in 0..STEP_REPEATS {
        let rate = arrays.pass();
        let before = stepper.timings();
        let t = Instant::now();
        refinement = black_box(stepper.step().expect("step")).refinement_steps;
        let time = t.elapsed().as_secs_f64();
        let after = stepper.timings();
        spent.0 += after.rhs - before.rhs;
        spent.1 += after.solve - before.solve;
        ratios.push(time / (bytes / (rate * 1e9)));
        rates.push(rate);
        times.push(time);
    }
    for v in [&mut ratios, &mut rates, &mut times] {
        v.sort_by(f64::total_cmp);
    }
    StepMeasurement {
        unknowns: stepper.n_unknowns(),
        l_entries: stepper.factor_nonzeros().unwrap_or(0),
        step: times[STEP_REPEATS / 2],
        paired_ratio: [1, 2, 3].map(|q| ratios[q * (STEP_REPEATS - 1) / 4]),
        paired_bandwidth: rates[STEP_REPEATS / 2],
        rhs: spent.0.as_secs_f64() / STEP_REPEATS as f64,
        solve: spent.1.as_secs_f64() / STEP_REPEATS as f64,
        refinement_steps: refinement,
    }
}

fn main() {
    let n = env_usize("CORNERFLOW_BENCH_TRIAD_MB", 320) * 1_000_000 / 8;
    println!("triad a = b + s*c, 3 x {} MB, {REPEATS} passes", n * 8 / 1_000_000);
    let mut bandwidth = [0.0; 2];
    for threads in [1, 2] {
        let (median, best) = triad(n, threads);
        bandwidth[threads - 1] = median;
        println!("  {threads} thread(s): median {median:.1} GB/s, best {best:.1} GB/s");
    }
    let cells = env_usize("CORNERFLOW_BENCH_STEP_CELLS", 130);
    if cells < 2 {
        return;
    }
    let m = imex_step(cells, n);
    let bytes = 2.0 * 8.0 * m.l_entries as f64;
    println!(
        "IMEX BDF2 step, {} unknowns, nnz(L) = {}: median {:.3} s (right-hand side {:.3} s, \
         solve {:.3} s, {} refinement step(s) per step)",
        m.unknowns, m.l_entries, m.step, m.rhs, m.solve, m.refinement_steps
    );
    for (threads, bw) in [1, 2].iter().zip(bandwidth) {
        let bound = bytes / (bw * 1e9);
        println!(
            "  bound of two triangular solves at the {threads}-thread bandwidth: {bound:.3} s \
             ({:.2} GB read); step / bound = {:.2}, solve / bound = {:.2}",
            bytes / 1e9,
            m.step / bound,
            m.solve / bound
        );
    }
    let [low, median, high] = m.paired_ratio;
    println!(
        "  each of {STEP_REPEATS} steps against a 2-thread triad pass just before it: median \
         bandwidth {:.1} GB/s, median step / bound = {median:.2} (quartiles {low:.2}-{high:.2})",
        m.paired_bandwidth
    );
}
