//! The latent-level Vecchia approximation of the profiled Gaussian
//! likelihood, for fits **with a nugget** on studies too large for one dense
//! factorisation of `V`: the same inputs and output as
//! [`super::vecchia::profiled_vecchia`], more accurate when `eta > 0`.
//!
//! With `V = (1 - eta) R(range) + eta I` (`sigma2` profiled out as in
//! [`super::likelihood`]), write `y = X beta + A w + e` with `w` the
//! noise-free field at the `L` distinct positions (`w ~ N(0, (1 - eta) R)`),
//! `A` (`n x L`) the incidence of pots on positions (pots at one position
//! share one latent value) and `e ~ N(0, eta I)`. The Vecchia approximation
//! is applied to `w` only (the "latent" form of Katzfuss & Guinness 2021,
//! *Statistical Science* 36: 124-141, §3; the collapsed nearest-neighbour
//! Gaussian process of Datta, Banerjee, Finley & Gelfand 2016, *JASA* 111:
//! 800-812, and Finley et al. 2019, *JCGS* 28: 401-414): in the max-min order
//! of the positions ([`super::vecchia_order`]), position `k` given its `m`
//! nearest earlier positions `N(k)` has `b_k = R_NN^-1 R_Nk` and conditional
//! variance `d_k = (1 - eta)(1 - R_kN b_k)`, so that the approximated
//! precision of `w` is `Q = U U'`, column `k` of `U` being `1/sqrt(d_k)` at
//! `k` and `-b_k/sqrt(d_k)` at `N(k)`; `ln|Q| = -sum_k ln d_k`. The response
//! then has `S = A Q^-1 A' + eta I`, and with `W = Q + A'A / eta`
//! (`A'A` = the pot counts per position, diagonal):
//!
//! * `ln|S| = n ln eta - ln|Q| + ln|W|` (the matrix determinant lemma);
//! * `z_a' S^-1 z_b = z_a'z_b / eta - (A'z_a)' W^-1 (A'z_b) / eta^2`
//!   (Woodbury; Harville 1997, *Matrix Algebra from a Statistician's
//!   Perspective*, §18.2).
//!
//! The cross products `X'S^-1 X`, `X'S^-1 y`, `y'S^-1 y` and `ln|S|` go to
//! [`profile_crossproducts`], which gives the GLS estimate,
//! `(X'S^-1 X)^-1` and the profiled ML/REML log-likelihood by the one
//! formula of the dense path (`likelihood::profile_loglik`), so SEs and Wald
//! tests come from the same approximation. With `m = L - 1` nothing is left
//! out and the value is the exact likelihood.
//!
//! `W` is sparse (pattern: the union of the cliques `{k} ∪ N(k)`); it is
//! factorised by faer's sparse Cholesky with an approximate-minimum-degree
//! fill-reducing ordering, whose symbolic analysis is done once per
//! conditioning in [`LatentVecchia::new`] and reused by every evaluation;
//! each evaluation makes one numeric factorisation. Cost per evaluation:
//! `O(L m^3)` for the conditionals (in parallel over ranks, as the
//! response-level form), `O(L m^2)` to assemble `W`, the numeric
//! factorisation (its flops depend on the fill, printed by `cargo bench
//! --bench vecchia` as nnz of the factor) and `p + 1` sparse solves.
//! Memory: `O(L m^2)` for the assembly map, the factor's fill.
//!
//! **Rounding.** The Woodbury form subtracts from `z'z / eta`: at most
//! `log10(1 + (1 - eta) lambda_max(R~) / eta)` digits are lost (with
//! `lambda_max <= L`), so about 5 of 16 at `n = 2,000`, `eta = 0.01`; and
//! `z'z` itself is large against the residual sum of squares when a column
//! has a large mean (a trait of 60 g varying by 2 g, a driver of 50 units
//! varying by 0.05): on a 3,000-pot field the value then moved by up to
//! 6e-6 between parameters 1e-7 apart. So the columns of `X` and `y` are
//! first centred on the intercept column (`Centring`: the same GLS, `Q` and
//! `ln|X'V^-1 X|`, with beta and its covariance mapped back), which brought
//! that roughness to below 1e-8 (`vecchia_latent_tests.rs`). At
//! `eta = 0` there is no noise to integrate out and the latent form *is* the
//! response-level one: the evaluation is delegated to
//! [`super::vecchia::profiled_vecchia`] on the pots' own conditioning (which,
//! with pots at one position, refuses with the exact path's nugget hint).
//!
//! **Normalised residuals.** `Profiled::whitened` holds the response-level
//! Vecchia whitening ([`super::vecchia::whiten_vecchia`] on the pots' own
//! conditioning, at the same parameters) of the latent form's GLS residual
//! `y - X beta`: each pot's residual given its `m` nearest earlier pots over
//! its conditional standard deviation. Those are independent under the
//! model up to the response-level approximation, cost one `O(n m^3)` pass
//! (done only when asked: once at the end of [`maximise_latent`]), and are
//! the same whitening the model stage applies to `X` for its residual
//! diagnostics; an exact whitening of `S` would need a dense factor. Their
//! sum of squares is close to, not equal to, `Profiled::q`.
//!
//! **Accuracy by family** (docs/model.md, `cargo bench --bench
//! vecchia_latent`, n = 2,000 with a nugget): at m = 30 within 0.11 and 0.34
//! of the exact log-likelihood for the exponential and Matérn 1.5 families
//! (the response-level form: 1.5 and 1.9); 2.7 to 4.0 for the spherical
//! family at m <= 40; 17 to 45 for the Gaussian family, whose noise-free field
//! is nearly determined by its neighbours so that its conditionals are lost
//! to rounding (the response-level form is better there).
//!
//! **A share of the nugget in the field.** [`LatentVecchia::with_field_share`]
//! moves a share `f` of the nugget from the pots into the latent field:
//! the field's covariance is `(1 - eta) R + f eta I` at the positions and
//! the pots keep `(1 - f) eta` of independent noise. When every pot stands
//! at its own position `A = I` and `S` is unchanged, so this is the same
//! model (with pots sharing a position it would not be: refused). The
//! Vecchia approximation then applies to a field that is no longer nearly
//! determined by its neighbours (the Gaussian family's trouble above);
//! `f -> 1` approaches the response-level form, `f = 0` is the latent form.
//! The conditionals use the kernel of that covariance directly; `W = Q +
//! A'A / ((1 - f) eta)` and the Woodbury and determinant formulas above
//! with `(1 - f) eta` for `eta`.
//!
//! A latent conditional variance whose square root is not above
//! [`CORRELATION_MIN_DIAGONAL`] (a noise-free field nearly determined by its
//! neighbours, e.g. the Gaussian family at long ranges) is refused with the
//! dense path's error type.

use super::covariance::{CovParams, Kernel};
use super::factor::{CORRELATION_MIN_DIAGONAL, FactorError, is_sequential};
use super::likelihood::{
    Distances, LikelihoodError, LikelihoodKind, Maximum, Profiled, SearchOptions, check_params,
    check_sizes_n, gls_solve, maximise_by, profile_loglik,
};
use super::vecchia::{
    ConditionalWork, Conditioning, conditional, conditional_error, profiled_vecchia, whiten_vecchia,
};
use crate::spatial::correlation::Family;
use faer::dyn_stack::{MemBuffer, MemStack};
use faer::sparse::linalg::cholesky::supernodal::SupernodalLltRef;
use faer::sparse::linalg::cholesky::{
    CholeskySymbolicParams, LltRef, SymbolicCholesky, SymbolicCholeskyRaw, SymmetricOrdering,
    factorize_symbolic_cholesky,
};
use faer::sparse::{SparseColMatRef, SymbolicSparseColMatRef};
use faer::{Conj, Mat, Par, Side};
use std::collections::HashMap;

/// Positions from which the conditionals are computed in parallel and the
/// sparse factorisation may use threads.
const PARALLEL_FROM: usize = 512;

/// The conditioning of the latent field and the symbolic factorisation of
/// `W`, built once and reused by every evaluation (see the module docs).
#[derive(Debug)]
pub struct LatentVecchia {
    /// The pots' own conditioning (residuals; `eta = 0`).
    pots: Conditioning,
    /// The conditioning of the distinct positions.
    locs: Conditioning,
    /// Pot (original index) -> rank of its position in `locs`.
    loc_of: Vec<usize>,
    /// Pots at the position of each rank (the diagonal of `A'A`).
    counts: Vec<f64>,
    /// Offsets of each rank's clique `{k} ∪ N(k)` in the coefficient array.
    clique: Vec<usize>,
    /// Lower triangle of `W` in compressed columns (rank order).
    col_ptr: Vec<usize>,
    row_idx: Vec<usize>,
    /// For each clique pair `(i, j <= i)` in rank order, its slot in `row_idx`.
    scatter: Vec<u32>,
    symbolic: SymbolicCholesky<usize>,
    /// The share `f` of the nugget carried by the latent field
    /// ([`LatentVecchia::with_field_share`]); 0 by default.
    field_share: f64,
}

/// The distinct positions of `(x, y)` in order of first appearance and each
/// pot's position index. Positions are equal when their coordinates are
/// (`-0.0` equals `0.0`).
fn distinct(x: &[f64], y: &[f64]) -> (Vec<f64>, Vec<f64>, Vec<usize>) {
    let key = |v: f64| (v + 0.0).to_bits();
    let mut seen: HashMap<(u64, u64), usize> = HashMap::with_capacity(x.len());
    let (mut ux, mut uy) = (Vec::new(), Vec::new());
    let loc = x
        .iter()
        .zip(y)
        .map(|(&a, &b)| {
            *seen.entry((key(a), key(b))).or_insert_with(|| {
                ux.push(a);
                uy.push(b);
                ux.len() - 1
            })
        })
        .collect();
    (ux, uy, loc)
}

impl LatentVecchia {
    /// The max-min ordering and `m` nearest earlier neighbours of the pots
    /// at `(x, y)` and of their distinct positions, and the symbolic
    /// factorisation of `W`. `m >= 1`.
    pub fn new(x: &[f64], y: &[f64], m: usize) -> Result<LatentVecchia, LikelihoodError> {
        let pots = Conditioning::new(x, y, m)?;
        Self::from_pots(pots, x, y, m)
    }

    /// [`LatentVecchia::new`] from the pots' response-level conditioning
    /// (the same `m`; reused as is when no two pots share a position).
    pub fn from_conditioning(cond: &Conditioning) -> Result<LatentVecchia, LikelihoodError> {
        let n = cond.len();
        let (mut x, mut y) = (vec![0.0; n], vec![0.0; n]);
        for (k, &i) in cond.order().iter().enumerate() {
            (x[i], y[i]) = cond.position(k);
        }
        Self::from_pots(cond.clone(), &x, &y, cond.m().max(1))
    }

    fn from_pots(pots: Conditioning, x: &[f64], y: &[f64], m: usize) -> Result<Self, LikelihoodError> {
        let (ux, uy, loc) = distinct(x, y);
        let locs = if ux.len() == x.len() {
            pots.clone()
        } else {
            Conditioning::with_rule(&ux, &uy, m, pots.rule())?
        };
        Self::assemble(pots, locs, &loc)
    }

    /// A latent conditioning given explicitly: `locs` over the distinct
    /// positions, `location_of[i]` the position (original index in `locs`)
    /// of pot `i`, which must lie there exactly. For tests against an
    /// independent computation with the same sets.
    pub fn with_locations(
        pots: Conditioning,
        locs: Conditioning,
        location_of: &[usize],
    ) -> Result<LatentVecchia, LikelihoodError> {
        let nl = locs.len();
        if location_of.len() != pots.len() || location_of.iter().any(|&l| l >= nl) {
            return Err(LikelihoodError::Invalid("every pot needs one of the positions".into()));
        }
        let mut rank = vec![0; nl];
        for (k, &l) in locs.order().iter().enumerate() {
            rank[l] = k;
        }
        let mut used = vec![false; nl];
        for (k, &i) in pots.order().iter().enumerate() {
            let l = location_of[i];
            used[l] = true;
            if pots.position(k) != locs.position(rank[l]) {
                return Err(LikelihoodError::Invalid(format!("pot {i} does not lie at position {l}")));
            }
        }
        if used.contains(&false) {
            return Err(LikelihoodError::Invalid("a position holds no pot".into()));
        }
        Self::assemble(pots, locs, location_of)
    }

    fn assemble(pots: Conditioning, locs: Conditioning, loc: &[usize]) -> Result<Self, LikelihoodError> {
        let nl = locs.len();
        let mut rank = vec![0; nl];
        for (k, &l) in locs.order().iter().enumerate() {
            rank[l] = k;
        }
        let loc_of: Vec<usize> = loc.iter().map(|&l| rank[l]).collect();
        let mut counts = vec![0.0; nl];
        for &k in &loc_of {
            counts[k] += 1.0;
        }
        let mut clique = vec![0; nl + 1];
        for k in 0..nl {
            clique[k + 1] = clique[k] + locs.set(k).len() + 1;
        }
        let members = |k: usize| std::iter::once(k).chain(locs.set(k).iter().map(|&r| r as usize));
        // the pattern: every pair of every clique, lower triangle
        let mut cols: Vec<Vec<usize>> = vec![Vec::new(); nl];
        for k in 0..nl {
            let c: Vec<usize> = members(k).collect();
            for i in 0..c.len() {
                for j in 0..=i {
                    cols[c[i].min(c[j])].push(c[i].max(c[j]));
                }
            }
        }
        let mut col_ptr = Vec::with_capacity(nl + 1);
        let mut row_idx = Vec::new();
        col_ptr.push(0);
        for c in &mut cols {
            c.sort_unstable();
            c.dedup();
            row_idx.extend_from_slice(c);
            col_ptr.push(row_idx.len());
        }
        drop(cols);
        if row_idx.len() > u32::MAX as usize {
            return Err(LikelihoodError::Invalid(format!(
                "the latent precision has {} entries, too many to index",
                row_idx.len()
            )));
        }
        let mut scatter = Vec::with_capacity(clique[nl] * (locs.m() + 2) / 2);
        for k in 0..nl {
            let c: Vec<usize> = members(k).collect();
            for i in 0..c.len() {
                for j in 0..=i {
                    let (r, col) = (c[i].max(c[j]), c[i].min(c[j]));
                    let rows = &row_idx[col_ptr[col]..col_ptr[col + 1]];
                    let at = rows.binary_search(&r).expect("the pattern holds every clique pair");
                    scatter.push((col_ptr[col] + at) as u32);
                }
            }
        }
        let pattern = SymbolicSparseColMatRef::new_checked(nl, nl, &col_ptr, None, &row_idx);
        let symbolic = factorize_symbolic_cholesky(
            pattern,
            Side::Lower,
            SymmetricOrdering::Amd,
            CholeskySymbolicParams::default(),
        )
        .map_err(|e| LikelihoodError::Invalid(format!("the sparse factorisation cannot be set up: {e:?}")))?;
        Ok(LatentVecchia {
            pots,
            locs,
            loc_of,
            counts,
            clique,
            col_ptr,
            row_idx,
            scatter,
            symbolic,
            field_share: 0.0,
        })
    }

    /// The same structure with a share `f` (`0 <= f < 1`) of the nugget
    /// carried by the latent field (module docs, "A share of the nugget in
    /// the field"). Refused when two pots share a position: there the
    /// share would change the model (their errors would correlate).
    pub fn with_field_share(mut self, f: f64) -> Result<LatentVecchia, LikelihoodError> {
        if !(0.0..1.0).contains(&f) {
            return Err(LikelihoodError::Invalid(format!(
                "the field's share of the nugget must lie in [0, 1), got {f}"
            )));
        }
        if f > 0.0 && self.locs.len() != self.pots.len() {
            return Err(LikelihoodError::Invalid(
                "a share of the nugget in the latent field needs every pot at its own position".into(),
            ));
        }
        self.field_share = f;
        Ok(self)
    }

    /// The share of the nugget carried by the latent field.
    pub fn field_share(&self) -> f64 {
        self.field_share
    }

    /// Number of pots.
    pub fn len(&self) -> usize {
        self.pots.len()
    }

    /// Always false: a conditioning holds at least one pot.
    pub fn is_empty(&self) -> bool {
        self.pots.is_empty()
    }

    /// The pots' own (response-level) conditioning.
    pub fn pots(&self) -> &Conditioning {
        &self.pots
    }

    /// Number of distinct positions (the size of `W`).
    pub fn locations(&self) -> usize {
        self.locs.len()
    }

    /// The largest number of neighbours of any position.
    pub fn m(&self) -> usize {
        self.locs.m()
    }

    /// Stored entries of the lower triangle of `W` and of its sparse
    /// Cholesky factor (the fill).
    pub fn nnz(&self) -> (usize, usize) {
        (self.row_idx.len(), self.symbolic.len_val())
    }

    /// The kernel of the latent field at `params`: the correlation without
    /// nugget (scaled by `1 - eta` afterwards), or with a field share `f`
    /// the covariance `(1 - eta) R + f eta I` itself.
    fn field_kernel(&self, params: &CovParams) -> Kernel {
        if self.field_share > 0.0 {
            let s = 1.0 - params.eta + self.field_share * params.eta;
            Kernel::scaled(&CovParams { eta: self.field_share * params.eta / s, ..*params }, s)
        } else {
            Kernel::correlation(&CovParams { eta: 0.0, ..*params })
        }
    }

    /// `U`'s columns (the clique coefficients `[1, -b_k] / sqrt(d_k)`, rank
    /// order) and `ln|Q| = -sum ln d_k` of the latent field at `params`.
    fn latent_factor(&self, params: &CovParams) -> Result<(Vec<f64>, f64), LikelihoodError> {
        let nl = self.locs.len();
        let threads = if is_sequential() || nl < PARALLEL_FROM {
            1
        } else {
            std::thread::available_parallelism().map(|t| t.get()).unwrap_or(1).min(8)
        };
        let chunk = nl.div_ceil(threads);
        let mut coef = vec![0.0; self.clique[nl]];
        let mut logd = vec![0.0; nl];
        let kernel = self.field_kernel(params);
        let results: Vec<Result<(), LikelihoodError>> = std::thread::scope(|s| {
            let mut handles = Vec::new();
            let (mut rest_c, mut rest_l) = (coef.as_mut_slice(), logd.as_mut_slice());
            for t in 0..threads {
                let (k0, k1) = (t * chunk, ((t + 1) * chunk).min(nl));
                let (c, rc) = rest_c.split_at_mut(self.clique[k1] - self.clique[k0]);
                let (l, rl) = rest_l.split_at_mut(k1 - k0);
                (rest_c, rest_l) = (rc, rl);
                let kernel = &kernel;
                if threads == 1 {
                    return vec![self.conditionals(kernel, params, k0, c, l)];
                }
                handles.push(s.spawn(move || self.conditionals(kernel, params, k0, c, l)));
            }
            handles.into_iter().map(|h| h.join().expect("a latent conditional thread panicked")).collect()
        });
        // the first failure in rank order, whatever the threads
        results.into_iter().collect::<Result<Vec<()>, _>>()?;
        Ok((coef, -logd.iter().sum::<f64>()))
    }

    /// The conditionals of the ranks `k0 .. k0 + logd.len()`: coefficients
    /// into `coef` (from rank `k0`'s clique on), `ln d_k` into `logd`.
    fn conditionals(
        &self,
        kernel: &Kernel,
        params: &CovParams,
        k0: usize,
        coef: &mut [f64],
        logd: &mut [f64],
    ) -> Result<(), LikelihoodError> {
        let cond = &self.locs;
        let base = self.clique[k0];
        let mut work = ConditionalWork::default();
        for (off, ld) in logd.iter_mut().enumerate() {
            let k = k0 + off;
            let d =
                conditional(cond, kernel, k, &mut work).map_err(|e| conditional_error(cond, params, e))?;
            let v = &work.b;
            // the kernel is the field's own covariance when it carries a share of the nugget
            let dl = if self.field_share > 0.0 { d } else { (1.0 - params.eta) * d };
            let inv_sd = 1.0 / dl.sqrt();
            let c = &mut coef[self.clique[k] - base..self.clique[k + 1] - base];
            c[0] = inv_sd;
            for (ci, b) in c[1..].iter_mut().zip(v) {
                *ci = -b * inv_sd;
            }
            *ld = dl.ln();
        }
        Ok(())
    }

    /// The profiled likelihood at `params` (module docs); the normalised
    /// residuals only when `residuals` (else `whitened` is empty: the search
    /// of [`maximise_latent`] needs none). [`profiled_latent`] asks for them.
    pub fn evaluate(
        &self,
        params: &CovParams,
        x: &[Vec<f64>],
        y: &[f64],
        method: LikelihoodKind,
        residuals: bool,
    ) -> Result<Profiled, LikelihoodError> {
        check_sizes_n(self.pots.len(), x, y)?;
        check_params(params)?;
        let eta = params.eta;
        if eta == 0.0 {
            return profiled_vecchia(&self.pots, params, x, y, method);
        }
        let (n, nl) = (self.pots.len(), self.locs.len());
        let (coef, logdet_q) = self.latent_factor(params)?;
        // the noise left to the pots when the field carries a share of the nugget
        let eta = eta * (1.0 - self.field_share);
        // W = U U' + diag(counts) / eta, lower triangle
        let mut vals = vec![0.0; self.row_idx.len()];
        let mut t = 0;
        for k in 0..nl {
            let u = &coef[self.clique[k]..self.clique[k + 1]];
            for i in 0..u.len() {
                for &uj in &u[..=i] {
                    vals[self.scatter[t] as usize] += u[i] * uj;
                    t += 1;
                }
            }
            // the diagonal is the first stored row of its column
            vals[self.col_ptr[k]] += self.counts[k] / eta;
        }
        let par = if is_sequential() || nl < PARALLEL_FROM { Par::Seq } else { Par::rayon(0) };
        let w = SparseColMatRef::new(
            SymbolicSparseColMatRef::new_checked(nl, nl, &self.col_ptr, None, &self.row_idx),
            &vals,
        );
        let mut lval = vec![0.0; self.symbolic.len_val()];
        let mut mem =
            MemBuffer::new(self.symbolic.factorize_numeric_llt_scratch::<f64>(par, Default::default()));
        self.symbolic
            .factorize_numeric_llt(
                &mut lval,
                w,
                Side::Lower,
                Default::default(),
                par,
                MemStack::new(&mut mem),
                Default::default(),
            )
            .map_err(|_| LikelihoodError::NotPositiveDefinite {
                family: params.family.name(),
                range: params.range,
                eta: params.eta,
                location: FactorError::NotPositiveDefinite {
                    index: 0,
                    pivot: f64::NAN,
                    min_diagonal: CORRELATION_MIN_DIAGONAL,
                },
            })?;
        let logdet_w = self.logdet_factor(&lval);
        let llt = LltRef::new(&self.symbolic, &lval);
        // the columns centred on the intercept (module docs, "Rounding"),
        // A'z for them and y, then W^-1 A'z
        let centring = Centring::of(x, y);
        let (xc, yc) = centring.apply(x, y);
        let cols: Vec<&[f64]> = xc.iter().map(Vec::as_slice).chain(std::iter::once(yc.as_slice())).collect();
        let c = cols.len();
        let mut g = Mat::<f64>::zeros(nl, c);
        for (j, z) in cols.iter().enumerate() {
            let gj = g
                .col_mut(j)
                .try_as_col_major_mut()
                .expect("a column of a matrix is contiguous")
                .as_slice_mut();
            for (&k, &v) in self.loc_of.iter().zip(z.iter()) {
                gj[k] += v;
            }
        }
        let mut h = g.clone();
        let mut smem = MemBuffer::new(llt.solve_in_place_scratch::<f64>(c, par));
        llt.solve_in_place_with_conj(Conj::No, h.as_mut(), par, MemStack::new(&mut smem));
        let mut cross = vec![0.0; c * c];
        for a in 0..c {
            for b in 0..=a {
                let zz: f64 = cols[a].iter().zip(cols[b]).map(|(u, v)| u * v).sum();
                let gh = 0.5
                    * (g.col_as_slice(a).iter().zip(h.col_as_slice(b)).map(|(u, v)| u * v).sum::<f64>()
                        + g.col_as_slice(b).iter().zip(h.col_as_slice(a)).map(|(u, v)| u * v).sum::<f64>());
                let s = zz / eta - gh / (eta * eta);
                cross[a * c + b] = s;
                cross[b * c + a] = s;
            }
        }
        let logdet_s = n as f64 * eta.ln() - logdet_q + logdet_w;
        let mut prof = profile_crossproducts(&cross, n, logdet_s, method, *params)?;
        centring.restore(&mut prof);
        if residuals {
            prof.whitened = self.residuals(params, x, y, &prof.beta)?;
        }
        Ok(prof)
    }

    /// `ln|W|` from the values of its sparse Cholesky factor: twice the sum
    /// of the logarithms of the factor's diagonal (the ordering does not
    /// change a determinant).
    fn logdet_factor(&self, lval: &[f64]) -> f64 {
        match self.symbolic.raw() {
            SymbolicCholeskyRaw::Simplicial(s) => {
                let (cp, ri) = (s.col_ptr(), s.row_idx());
                (0..s.ncols())
                    .map(|j| {
                        let at = (cp[j]..cp[j + 1])
                            .find(|&t| ri[t] == j)
                            .expect("a factor column holds its pivot");
                        2.0 * lval[at].ln()
                    })
                    .sum()
            }
            SymbolicCholeskyRaw::Supernodal(s) => {
                let l = SupernodalLltRef::new(s, lval);
                (0..s.n_supernodes())
                    .map(|sn| {
                        let v = l.supernode(sn).val();
                        (0..v.ncols()).map(|c| 2.0 * v[(c, c)].ln()).sum::<f64>()
                    })
                    .sum()
            }
        }
    }

    /// The response-level Vecchia whitening of `y - X beta` (module docs),
    /// in the pots' own order.
    fn residuals(
        &self,
        params: &CovParams,
        x: &[Vec<f64>],
        y: &[f64],
        beta: &[f64],
    ) -> Result<Vec<f64>, LikelihoodError> {
        let r: Vec<f64> =
            (0..y.len()).map(|i| y[i] - x.iter().zip(beta).map(|(c, b)| c[i] * b).sum::<f64>()).collect();
        let (w, _) = whiten_vecchia(&self.pots, params, &[&r])?;
        let mut own = vec![0.0; r.len()];
        for (k, &i) in self.pots.order().iter().enumerate() {
            own[i] = w[(k, 0)];
        }
        Ok(own)
    }
}

/// The centring of the columns on the intercept (module docs, "Rounding"):
/// `X~ = X T`, `T = I - e_c m'` (`m_j` the mean of column `j`, `m_c = 0` for
/// the intercept column `c`), and `y~ = y - ybar 1`. The GLS of `(X~, y~)`
/// has the same `Q`, the same `ln|X'V^-1 X|` (`det T = 1`) and
/// `beta = ybar e_c + T beta~`, `(X'V^-1 X)^-1 = T (X~'V^-1 X~)^-1 T'`.
/// Without an intercept column (all ones) nothing is changed.
struct Centring {
    /// The intercept column, the column means and the mean of `y`.
    shift: Option<(usize, Vec<f64>, f64)>,
}

impl Centring {
    fn of(x: &[Vec<f64>], y: &[f64]) -> Centring {
        let Some(c) = x.iter().position(|col| col.iter().all(|&v| v == 1.0)) else {
            return Centring { shift: None };
        };
        let n = y.len() as f64;
        let m = x.iter().enumerate().map(|(j, col)| if j == c { 0.0 } else { col.iter().sum::<f64>() / n });
        Centring { shift: Some((c, m.collect(), y.iter().sum::<f64>() / n)) }
    }

    fn apply(&self, x: &[Vec<f64>], y: &[f64]) -> (Vec<Vec<f64>>, Vec<f64>) {
        match &self.shift {
            None => (x.to_vec(), y.to_vec()),
            Some((_, m, ybar)) => (
                x.iter().zip(m).map(|(col, mj)| col.iter().map(|v| v - mj).collect()).collect(),
                y.iter().map(|v| v - ybar).collect(),
            ),
        }
    }

    /// `beta` and `(X'V^-1 X)^-1` of `prof` back on the columns as given.
    fn restore(&self, prof: &mut Profiled) {
        let Some((c, m, ybar)) = &self.shift else { return };
        let p = m.len();
        let shift: f64 = m.iter().zip(&prof.beta).map(|(mj, b)| mj * b).sum();
        prof.beta[*c] += ybar - shift;
        // T C T': row c of T is e_c - m', every other row e_j
        let t = |a: usize, i: usize| -> f64 {
            if a == *c { f64::from(u8::from(i == *c)) - m[i] } else { f64::from(u8::from(i == a)) }
        };
        let old = prof.xtvx_inv.clone();
        let tc: Vec<f64> =
            (0..p * p).map(|k| (0..p).map(|i| t(k / p, i) * old[i * p + k % p]).sum()).collect();
        prof.xtvx_inv = (0..p * p).map(|k| (0..p).map(|j| tc[(k / p) * p + j] * t(k % p, j)).sum()).collect();
    }
}

/// GLS quantities from the cross products `C = [X | y]' V^-1 [X | y]`
/// (`(p+1) x (p+1)`, row-major) and `ln|V|` for `n` observations: the same
/// beta, `(X'V^-1 X)^-1` (by `small_spd`) and log-likelihood formula as
/// `likelihood::profile_whitened`, with
/// `Q = y'V^-1 y - (X'V^-1 y)' beta`. `whitened` is left empty.
pub fn profile_crossproducts(
    cross: &[f64],
    n: usize,
    logdet_v: f64,
    method: LikelihoodKind,
    params: CovParams,
) -> Result<Profiled, LikelihoodError> {
    let c = (cross.len() as f64).sqrt().round() as usize;
    if c == 0 || c * c != cross.len() {
        return Err(LikelihoodError::Invalid("the cross products must be a square matrix".into()));
    }
    let p = c - 1;
    let a: Vec<f64> = (0..p * p).map(|t| cross[(t / p) * c + t % p]).collect();
    let b: Vec<f64> = (0..p).map(|i| cross[i * c + p]).collect();
    let (inv, logdet_xtvx, beta) = gls_solve(&a, &b, p)?;
    let q = cross[p * c + p] - b.iter().zip(&beta).map(|(u, v)| u * v).sum::<f64>();
    let (loglik, sigma2) = profile_loglik(n, p, q, logdet_v, logdet_xtvx, method)?;
    Ok(Profiled {
        method,
        params,
        loglik,
        beta,
        sigma2,
        q,
        logdet_v,
        logdet_xtvx,
        xtvx_inv: inv,
        whitened: Vec::new(),
        n,
        p,
    })
}

/// The profiled ML or REML log-likelihood of the latent-level Vecchia
/// approximation at `params` (module docs), with what the GLS needs and the
/// normalised residuals of the module docs (in the pots' own order, not
/// divided by sigma).
pub fn profiled_latent(
    lat: &LatentVecchia,
    params: &CovParams,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
) -> Result<Profiled, LikelihoodError> {
    lat.evaluate(params, x, y, method, true)
}

/// Maximise the latent-level Vecchia likelihood over `(ln range, eta)` by
/// the search of [`super::likelihood::maximise_by`] (the starts, bounds and
/// simplex of the exact path; `dist` sets the range bounds and start
/// ranges). Residuals are computed once, at the maximum. The
/// `factorisations` of the result count dense factorisations only: zero here.
/// The model stage uses [`super::vecchia_search::maximise_latent_shared`];
/// this simplex is its reference in tests and `benches/vecchia_search.rs`.
pub fn maximise_latent(
    dist: &Distances,
    lat: &LatentVecchia,
    family: Family,
    x: &[Vec<f64>],
    y: &[f64],
    method: LikelihoodKind,
    opts: &SearchOptions,
) -> Result<Maximum, LikelihoodError> {
    check_sizes_n(lat.len(), x, y)?;
    if dist.len() != lat.len() {
        return Err(LikelihoodError::Invalid("the distances and the conditioning disagree on n".into()));
    }
    let mut best = maximise_by(dist, family, opts, |p| lat.evaluate(p, x, y, method, false))?;
    best.best = lat.evaluate(&best.best.params, x, y, method, true)?;
    Ok(best)
}

#[cfg(test)]
#[path = "vecchia_latent_tests.rs"]
mod tests;
