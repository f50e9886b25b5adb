"""Every formula auditmean uses, with its published source, for the workpaper's methods part.

One row per formula: the step it belongs to, what it computes, the formula
in plain text, the source (as cited in the docstring of the module that
computes it; values recalled from memory say so), and a condition that
says whether this engagement used it. The wording is our own; the module
named in ``where`` holds the code and the full citation.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

__all__ = ["Method", "METHODS", "used_here", "methods_for"]


@dataclass(frozen=True)
class Method:
    step: str
    name: str
    formula: str
    source: str
    where: str
    used_when: str = "always"
    #: the design the row belongs to: "stratified", "monetary_unit" or "both"
    design: str = "stratified"


_COCHRAN = "Cochran, W. G. (1977), Sampling Techniques, 3rd ed., Wiley"

METHODS: tuple[Method, ...] = (
    # --- population
    Method(
        "population", "content fingerprint",
        "SHA-256 of the UTF-8 text with one line per item, items sorted by item id (code-point order): "
        "item id, TAB, book value rounded to 2 decimals (no separators, 0.00 for -0.00), "
        "[TAB, preassigned stratum], LF",
        "auditmean's own definition; SHA-256 as in NIST (2015), FIPS PUB 180-4, Secure Hash Standard",
        "auditmean.population.content_fingerprint", design="both",
    ),
    Method(
        "population", "file fingerprint",
        "SHA-256 of the population file's bytes exactly as read (the same as `sha256sum FILE`)",
        "NIST (2015), FIPS PUB 180-4, Secure Hash Standard",
        "auditmean.population.load_population", design="both",
    ),
    Method(
        "population", "total of book values",
        "the exact sum of the book values, rounded once to the nearest double (independent of row order)",
        "correct rounding as IEEE 754 defines it; the number math.fsum gives "
        "(Shewchuk, J. R. (1997), Discrete & Computational Geometry 18, 305-363)",
        "auditmean.core.profile.exact_sum", design="both",
    ),
    Method(
        "population", "skewness G1",
        "g1 = m3 / m2^1.5 with m_k = sum((x - mean)^k) / n; G1 = g1 sqrt(n (n - 1)) / (n - 2)",
        "Joanes, D. N. and Gill, C. A. (1998), The Statistician 47, 183-189 (statistic G1)",
        "auditmean.core.moments.skewness_from_sums", design="both",
    ),
    Method(
        "population", "quantiles",
        "x_(j) + g (x_(j+1) - x_(j)), h = (n - 1) p + 1, j = floor(h), g = h - j (values sorted)",
        "Hyndman, R. J. and Fan, Y. (1996), The American Statistician 50(4), 361-365, definition 7",
        "auditmean.core.profile.quantiles", design="both",
    ),
    # --- strata
    Method(
        "strata", "cumulative square-root-of-frequency boundaries",
        "cut the range of book values into K equal-width classes; cumulate sqrt(class frequency); "
        "place the L - 1 boundaries at the class edges nearest to k/L of the cumulated total",
        f"Dalenius, T. and Hodges, J. L. (1959), JASA 54, 88-101; {_COCHRAN}, section 5A.7",
        "auditmean.core.boundaries.cumulative_sqrt_frequency", "stratify:cumulative_sqrt",
    ),
    Method(
        "strata", "geometric boundaries",
        "b_h = a r^h, r = (b / a)^(1/L), a and b the smallest and largest book value",
        "Gunning, P. and Horgan, J. M. (2004), Survey Methodology 30(2), 159-166",
        "auditmean.core.boundaries.geometric", "stratify:geometric",
    ),
    Method(
        "strata", "equal book-value boundaries",
        "cut the sorted book values where the running total is nearest to k T / L",
        "common practice in audit sampling; no single published source",
        "auditmean.core.boundaries.equal_value", "stratify:equal_value",
    ),
    Method(
        "strata", "boundaries that minimise the sample size",
        "random search over boundaries (and the top cutoff) for the smallest total Neyman sample that "
        "reaches the target variance of the estimated total",
        "Lavallee, P. and Hidiroglou, M. A. (1988), Survey Methodology 14(1), 33-43; Kozak, M. (2004), "
        "Statistics in Transition 6(5), 797-806 (journal, volume and pages cited from memory)",
        "auditmean.core.boundaries.optimal_boundaries", "stratify:optimal",
    ),
    Method(
        "strata", "boundary convention",
        "stratum h holds the book values x with b_(h-1) <= x < b_h; the top stratum every item at or "
        "above the top cutoff; credits (x < 0) and zeros (x = 0) in strata of their own",
        "auditmean's own convention",
        "auditmean.strata.stratify",
    ),
    # --- planning
    Method(
        "planning", "quantiles of the risks",
        "z_A = Phi^-1(1 - RIA) (one-sided); z_R = Phi^-1(1 - RIR / 2) (two-sided), 0 without a RIR",
        "the classical-variables chapters of Roberts, D. M. (1978), Statistical Auditing, AICPA, and of the "
        "AICPA audit sampling guide (quoted from memory)",
        "auditmean.core.sizing.z_acceptance",
    ),
    Method(
        "planning", "standard error aimed at, planned allowance for sampling risk",
        "SE = (TM - EM) / (z_A + z_R); A = z_R SE = (TM - EM) z_R / (z_A + z_R), or A = TM - EM "
        "without a risk of incorrect rejection",
        "Roberts (1978) and the AICPA audit sampling guide (quoted from memory)",
        "auditmean.core.sizing.planned_allowance",
    ),
    Method(
        "planning", "variance of the estimated total, stratified",
        "V = sum_h N_h (N_h - n_h) S_h^2 / n_h",
        f"{_COCHRAN}, section 5.3",
        "auditmean.core.sizing",
    ),
    Method(
        "planning", "unstratified sample size",
        "n0 = ((z_A + z_R) S N / (TM - EM))^2; n = n0 / (1 + n0 / N), rounded up, at most N",
        f"Roberts (1978) and the AICPA audit sampling guide (quoted from memory); the finite-population "
        f"correction: {_COCHRAN}, section 4.4, eq. 4.2 (equation number from memory)",
        "auditmean.core.sizing.sample_size",
    ),
    Method(
        "planning", "Neyman allocation",
        "n_h = lambda N_h S_h, clipped to [minimum, N_h]; a stratum whose share exceeds its count is "
        "examined in full and the rest shared again; whole sizes by largest remainders",
        f"Neyman, J. (1934), JRSS 97(4), 558-625; {_COCHRAN}, sections 5.5 and 5.8",
        "auditmean.core.sizing.allocate", "allocation:neyman",
    ),
    Method(
        "planning", "proportional allocation",
        "n_h = lambda N_h, clipped to [minimum, N_h]",
        f"{_COCHRAN}, section 5.3",
        "auditmean.core.sizing.allocate", "allocation:proportional",
    ),
    Method(
        "planning", "fewest items per stratum, from the checks",
        "each stratum at least max(30, floor(28 + 25 G1^2) + 1) items, G1 the skewness of its book values, so "
        "that the plan raises none of the normal-approximation checks on the book values; a stratum that "
        "cannot reach it is examined in full",
        "28 + 25 G1^2: Sugden, R. A., Smith, T. M. F. and Jones, R. P. (2000), JRSS B 62(4), 787-793 "
        "(the constant 28 quoted from memory); 30 items: rule of thumb, common practice, no published source",
        "auditmean.core.normality.size_passing_checks", "minimum:checks",
    ),
    Method(
        "planning", "equal allocation",
        "n_h = lambda, clipped to [minimum, N_h]",
        "common practice; no published source",
        "auditmean.core.sizing.allocate", "allocation:equal",
    ),
    Method(
        "planning", "standard deviations from an assumed misstatement pattern",
        "with error rate p and typical taint t, E[S^2] = v x2bar + m^2 S_x^2, m = alpha + beta p, "
        "v = beta^2 p (1 - p), beta = -t, alpha = 1 (mean-per-unit), 0 (difference) or p t (ratio); "
        "x2bar the mean of the squared book values",
        f"derived in auditmean.plan; the ratio residual variance as in {_COCHRAN}, section 6.3",
        "auditmean.plan._pattern_std_devs", "std_dev_source:pattern",
    ),
    Method(
        "planning", "does the plan reach its stated risk?",
        "the planned sample drawn R times from the population's own book values, misstated by the pattern "
        "scaled so the true misstatement equals TM; simulated risk of incorrect acceptance p = share of "
        "samples whose upper limit is at most TM; Monte Carlo s.e. sqrt(p (1 - p) / R); the plan misses its "
        "risk when p exceeds the planned RIA by more than two s.e.",
        "the approach of Neter, J. and Loebbecke, J. K. (1975), AICPA; the two-standard-error rule is "
        "auditmean's own",
        "auditmean.plan_check.check_plan", "plan_check",
    ),
    Method(
        "planning", "monetary-unit sample size",
        "n = the smallest n with B F(n EM / B) / n <= TM, B the positive book total, F(k) = the 1 - RIA "
        "quantile of a gamma distribution with shape k + 1 (the Poisson confidence factor; non-whole k for "
        "the expansion for expected misstatement); with EM = 0, n = ceil(F(0) B / TM); binomial basis: "
        "B x beta quantile (1 - RIA; k + 1, n - k) <= TM",
        "Leslie, D. A., Teitlebaum, A. D. and Anderson, R. J. (1979), Dollar-Unit Sampling, Copp Clark "
        "Pitman, and the AICPA audit sampling guide (factor tables quoted from memory); Poisson limits as "
        "gamma quantiles: Garwood, F. (1936), Biometrika 28, 437-442",
        "auditmean.core.monetary.sample_size", "monetary_size", "both",
    ),
    Method(
        "planning", "monetary-unit upper limit with no misstatement found",
        "B U_0 with U_0 the bound relied on for n draws of taint 0 (Stringer: B F(0) / n, e.g. about "
        "3.00 B / n at 95%)",
        "Stringer, K. W. (1963), Proceedings of the Business and Economic Statistics Section, ASA, 405-411 "
        "(pages from memory)",
        "auditmean.core.monetary.zero_error_bound", "monetary_size", "both",
    ),
    # --- selection
    Method(
        "selection", "key of an item",
        'key = first 16 hexadecimal digits of SHA-256(UTF-8(seed + ":" + item id)), read as an unsigned integer',
        "permanent random numbers: Ohlsson, E. (1995), in Cox et al. (eds), Business Survey Methods, Wiley, "
        "ch. 9 (chapter and pages from memory); SHA-256: NIST (2015), FIPS PUB 180-4",
        "auditmean.selection.item_keys",
    ),
    Method(
        "selection", "monetary units drawn",
        "items with a positive book value in cents c = round(100 x book value) laid out in item-id order, "
        "C_i = C_(i-1) + c_i, B = C_last; draw k = 1..n: u_k = first 13 hexadecimal digits of "
        'SHA-256(UTF-8(seed + ":unit:" + k)), drawn cent p_k = floor(u_k B / 2^52), the item with '
        "C_(i-1) <= p_k < C_i; draws independent, with replacement",
        "selection with probability proportional to size, with replacement: Hansen, M. H. and Hurwitz, W. N. "
        "(1943), Annals of Mathematical Statistics 14, 333-362 (cited from memory); SHA-256: NIST (2015), "
        "FIPS PUB 180-4",
        "auditmean.monetary_selection.select_monetary_units", "always", "monetary_unit",
    ),
    Method(
        "selection", "items examined in full (monetary units)",
        "every item with c n >= B (book value at or above the sampling interval J = B / n) is examined in "
        "full whatever the draws; a draw falling in it is absorbed, and its misstatement is added exactly",
        "common practice in monetary-unit sampling (Leslie, Teitlebaum and Anderson 1979, from memory)",
        "auditmean.monetary_selection.select_monetary_units", "always", "monetary_unit",
    ),
    Method(
        "selection", "the sample of a stratum",
        "the n_h items with the smallest keys (ties by item id); a stratum examined in full takes all its "
        "items; extending the sample takes the next smallest keys",
        "sorting on independent uniform keys gives a simple random sample without replacement: Tille, Y. "
        "(2006), Sampling Algorithms, Springer (chapter from memory)",
        "auditmean.selection.select",
    ),
    # --- estimation
    Method(
        "estimation", "mean-per-unit",
        "T_h = N_h ybar_h; s^2 of the audited values y with divisor n_h - 1",
        f"{_COCHRAN}, eqs. 5.3 and 5.6",
        "auditmean.core.estimators", "method:mpu",
    ),
    Method(
        "estimation", "difference estimation",
        "T_h = X_h + N_h dbar_h, d = y - x; s^2 of d with divisor n_h - 1",
        f"{_COCHRAN}, eq. 7.2 with b = 1",
        "auditmean.core.estimators", "method:difference",
    ),
    Method(
        "estimation", "ratio estimation (separate)",
        "T_h = R_h X_h, R_h = ybar_h / xbar_h; s^2 of y - R_h x with divisor n_h - 1",
        f"{_COCHRAN}, eqs. 6.9 and 6.38",
        "auditmean.core.estimators", "method:ratio",
    ),
    Method(
        "estimation", "ratio estimation (combined)",
        "T_h = R_c X_h, R_c = sum N_h ybar_h / sum N_h xbar_h over the sampled strata; s^2 of y - R_c x",
        f"{_COCHRAN}, eq. 6.49",
        "auditmean.core.estimators", "method:combined_ratio",
    ),
    Method(
        "estimation", "regression estimation (separate)",
        "T_h = N_h (ybar_h + b_h (Xbar_h - xbar_h)), b_h = s_xy / s_x^2; s^2 of the residuals with divisor n_h - 2",
        f"{_COCHRAN}, eqs. 7.17, 7.27 and 7.30",
        "auditmean.core.estimators", "method:regression",
    ),
    Method(
        "estimation", "variance of the estimated audited total",
        "v = sum_h N_h^2 (1 - f_h) / n_h s_(e,h)^2, f_h = n_h / N_h (finite-population correction); "
        "a stratum examined in full adds its exact audited total and no variance",
        f"{_COCHRAN}, sections 5.3, 6.9 and 7.3",
        "auditmean.core.estimators",
    ),
    Method(
        "estimation", "ratio variance with the sample book mean",
        "v2 = v1 (Xbar_h / xbar_h)^2 (the default; v1 uses the population book mean)",
        f"{_COCHRAN}, section 6.9; Royall, R. M. and Cumberland, W. G. (1981), JASA 76, 66-77",
        "auditmean.core.estimators", "ratio_variance",
    ),
    Method(
        "estimation", "a stratum with one sampled item",
        "its variance term is the average of the other strata's terms (or zero, or refused, as chosen)",
        "Lumley, T. (2010), Complex Surveys, Wiley, section 3.1.2 (the 'average' rule for lonely units)",
        "auditmean.core.estimators", "single_item",
    ),
    Method(
        "estimation", "normal limits",
        "Y +/- z SE with z = Phi^-1(1 - (1 - c) / 2); the evaluation uses c = 1 - 2 RIA, so each limit is "
        "a one-sided bound at the risk of incorrect acceptance",
        f"the normal-theory interval, {_COCHRAN}, section 2.8 (section number from memory)",
        "auditmean.core.intervals",
    ),
    Method(
        "estimation", "Student t limits, effective degrees of freedom",
        "df = (sum_h v_h)^2 / sum_h (v_h^2 / df_h)",
        f"Satterthwaite, F. E. (1946), Biometrics Bulletin 2, 110-114; {_COCHRAN}, eq. 5.16",
        "auditmean.core.intervals.satterthwaite_df",
    ),
    # --- conclusion
    Method(
        "conclusion", "projected misstatement and its limits",
        "PM = X - Y (book total minus estimated audited total; positive is overstatement); "
        "upper limit = PM + z_A SE, lower limit = PM - z_A SE",
        "the classical-variables evaluation of Roberts (1978) and the AICPA audit sampling guide (quoted from memory)",
        "auditmean.evaluation.conclusion",
    ),
    Method(
        "conclusion", "achieved and adjusted allowance for sampling risk",
        "A' = z_R SE (z_A SE without a RIR); when A' > A, A'' = TM - z_A SE, which equals A' + TM (1 - A'/A) "
        "under the classical plan",
        "the AICPA audit sampling guide (quoted from memory)",
        "auditmean.evaluation.conclusion",
    ),
    Method(
        "conclusion", "the decision rule",
        "the sample supports that the book value is not misstated by more than tolerable when the upper "
        "limit is at most TM and the lower limit at least -TM; a zero-width interval from a sample with no "
        "differences cannot be assessed",
        "auditmean's statement of the classical rule; the conclusion itself is the auditor's",
        "auditmean.evaluation.conclusion",
    ),
    Method(
        "conclusion", "finite-sample bound for stratified samples",
        "in stratum h, x = max(book - audited, 0) / u_h with u_h its largest book value (no item overstated "
        "by more than its book value), sorted from largest to smallest (the order least favourable to the "
        "conclusion, so the bound holds whatever the order drawn); capital K(m) = prod_t (1 + c (mu_t(m) - "
        "x_t)), mu_t(m) = (N_h m - sum_(i<t) x_i) / (N_h - t + 1) the mean of the items not yet drawn, c a "
        "constant bet, bounded below by prod_t (1 - c x_t + c N_h e / (N_h - t + 1)) with e the overstatement "
        "beyond what was found per unit of N_h u_h (which keeps the bound monotone); a total overstatement T is rejected when the smallest product of the strata's capitals over "
        "every split of T among them reaches 1 / alpha (Ville's inequality); the bound is the largest total "
        "not rejected, strata examined in full added at their exact misstatement",
        "Waudby-Smith, I. and Ramdas, A. (2024), Estimating means of bounded random variables by betting, "
        "JRSS B 86(1), 1-27, sections 4 and 6, and (2020), Confidence sequences for sampling without "
        "replacement, NeurIPS 33; Spertus, J. V. and Stark, P. B. (2022), Sweeter than SUITE: supermartingale "
        "stratified union-intersection tests of elections, E-Vote-ID 2022, LNCS 13553 (page numbers from "
        "memory); the minimum over splits: auditmean's own derivation (see the module)",
        "auditmean.core.finite_bounds.stratified_overstatement_bound", "finite_bound",
    ),
    Method(
        "conclusion", "the verdict rests on a limit that holds",
        "where a warning about the normal approximation is raised for a method, its verdict on overstatement "
        "rests on the finite-sample upper bound (supports when that bound is at most TM and the normal lower "
        "limit at least -TM) and its normal limits are for information only; otherwise on its normal limits",
        "auditmean's own rule; the conclusion itself is the auditor's",
        "auditmean.evaluation.conclusion",
    ),
    # --- monetary-unit evaluation
    Method(
        "monetary units", "taint and projected misstatement",
        "taint t = (book - audited) / book of the item a draw falls in, once per draw; projected "
        "misstatement = exact misstatement of the items examined in full + B_r x mean taint of the n_r draws "
        "in the remainder (B_r its book value)",
        "Leslie, Teitlebaum and Anderson (1979) (from memory)",
        "auditmean.monetary_bound.monetary_unit_bound", "always", "monetary_unit",
    ),
    Method(
        "monetary units", "upper bound of overstatement",
        "exact misstatement of the items examined in full + B_r U, U an upper bound on the remainder's mean "
        "overstatement taint per monetary unit, on max(t, 0): an understatement never lowers it; assumes "
        "audited >= 0 (no taint above 100%)",
        "the usual evaluation of a monetary-unit sample (Leslie, Teitlebaum and Anderson 1979, from memory); "
        "the conservative treatment of understatements is auditmean's stated rule",
        "auditmean.monetary_bound.monetary_unit_bound", "always", "monetary_unit",
    ),
    Method(
        "monetary units", "bound on understatement",
        "-(net misstatement of the items examined in full) + B_r U', U' the same method's bound on the mean "
        "of max(-t, 0), a separate bound; assumes no item is understated by more than its book value "
        "(not formed otherwise)",
        "the separate understatement bound of monetary-unit sampling (Leslie, Teitlebaum and Anderson 1979, "
        "from memory)",
        "auditmean.monetary_bound.monetary_unit_bound", "always", "monetary_unit",
    ),
    Method(
        "monetary units", "Stringer bound",
        "U = [F(0) + sum_i t_(i) (F(i) - F(i-1))] / n_r, the positive taints ranked from the largest, F the "
        "Poisson factor (gamma quantile, shape i + 1); capped at 1",
        "Stringer, K. W. (1963), Proceedings of the Business and Economic Statistics Section, ASA, 405-411 "
        "(pages from memory); no general proof of its confidence; conservative in published simulations",
        "auditmean.core.monetary.stringer_upper", "bound:stringer", "monetary_unit",
    ),
    Method(
        "monetary units", "error-count bound",
        "every draw with a positive taint counted as a 100% taint: U = beta quantile (confidence; k + 1, "
        "n_r - k), the Clopper-Pearson upper limit of the share of draws in error (1 when k = n_r)",
        "Clopper, C. J. and Pearson, E. S. (1934), Biometrika 26, 404-413",
        "auditmean.core.monetary.count_upper", "bound:count", "monetary_unit",
    ),
    Method(
        "monetary units", "betting bound",
        "for a candidate mean m, the capital K_t(m) = prod_(i<=t) (1 + lambda_i (m - x_i)) with predictable "
        "plug-in bets lambda_i, truncated at cap / (1 - m); U = the smallest m whose capital reaches "
        "1 / alpha at some draw (Ville's inequality), found by a bracketing search (false position); x the "
        "overstatement taints in draw order; the sample size fixed before any result is seen",
        "Waudby-Smith, I. and Ramdas, A. (2024), Estimating means of bounded random variables by betting, "
        "JRSS B 86(1), 1-27 (pages from memory); Ville, J. (1939), Etude critique de la notion de collectif, "
        "Gauthier-Villars",
        "auditmean.core.monetary.betting_upper", "bound:betting", "monetary_unit",
    ),
    Method(
        "monetary units", "error count or betting",
        "the smaller of the error-count bound at risk w alpha and the betting bound at risk (1 - w) alpha; "
        "holds at 1 - alpha by the union (Bonferroni) bound; w chosen by measurement",
        "Boole's inequality; the two bounds as above",
        "auditmean.core.monetary.count_or_betting_upper", "bound:count_or_betting", "monetary_unit",
    ),
    # --- warnings
    Method(
        "warnings", "items per stratum",
        "at least 30 items sampled per stratum",
        "rule of thumb, common practice; no published source",
        "auditmean.core.normality",
    ),
    Method(
        "warnings", "Cochran's rule",
        "n > 25 G1^2, G1 the skewness of what the stratum averages",
        f"{_COCHRAN}, section 2.15",
        "auditmean.core.normality",
    ),
    Method(
        "warnings", "the studentized mean",
        "n > 28 + 25 G1^2",
        "Sugden, R. A., Smith, T. M. F. and Jones, R. P. (2000), JRSS B 62(4), 787-793 "
        "(the constant 28 quoted from memory)",
        "auditmean.core.normality",
    ),
    Method(
        "warnings", "skewness of the whole estimator",
        "the skewness of the stratified estimator, from the strata's third moments, above 0.2 in size "
        "(Cochran's rule rewritten as G1 / sqrt(n) < 0.2)",
        f"derived from {_COCHRAN}, section 2.15 (third moment of a mean without replacement quoted from memory)",
        "auditmean.evaluation.flags",
    ),
    Method(
        "warnings", "few or no differences",
        "difference, ratio and regression limits need non-zero differences between audited and book "
        "values in the sample; fewer than 20 is flagged (threshold quoted from memory, common audit practice)",
        "Neter, J. and Loebbecke, J. K. (1975), Behavior of Major Statistical Estimators in Sampling "
        "Accounting Populations, AICPA; Kaplan, R. S. (1973), The Accounting Review 48",
        "auditmean.evaluation.flags",
    ),
    # --- second opinion
    Method(
        "second opinion", "rescaling bootstrap",
        "per replicate, weight g = 1 - lambda + lambda (n_h / m_h) r, lambda = sqrt(m_h (1 - f_h) / (n_h - 1)), "
        "m_h = n_h - 1, r the times an item is drawn; the estimator recomputed on each replicate; "
        "percentile limits",
        "Rao, J. N. K. and Wu, C. F. J. (1988), JASA 83, 231-241; Rao, J. N. K., Wu, C. F. J. and Yue, K. "
        "(1992), Survey Methodology 18, 209-217; percentile limits: Efron, B. (1979), Annals of Statistics 7, "
        "1-26 (cited from memory)",
        "auditmean.core.bootstrap", "second_opinion",
    ),
    Method(
        "second opinion", "Johnson's skewness-adjusted t",
        "t1 = ((e - mu) + mu3 / (6 s^2 n) + mu3 (e - mu)^2 / (3 s^4)) / (s / sqrt(n)), solved for mu at "
        "+/- t_(n-1); mu3 by the k-statistic k3 = n / ((n - 1)(n - 2)) sum (e - ebar)^3",
        "Johnson, N. J. (1978), JASA 73, 536-544; k3: Kendall and Stuart, The Advanced Theory of Statistics "
        "(edition not checked)",
        "auditmean.core.johnson", "second_opinion",
    ),
    # --- coverage
    Method(
        "coverage check", "coverage by simulation",
        "draw the planned sample R times from the population's own book values misstated by the model; "
        "coverage = share of samples whose limits contain the true audited total; Monte Carlo s.e. "
        "sqrt(p (1 - p) / R); bias s.e. sd / sqrt(R)",
        "the approach of Neter, J. and Loebbecke, J. K. (1975), AICPA",
        "auditmean.core.simulation", "coverage",
    ),
    Method(
        "coverage check", "beta taints",
        "shape parameters mean kappa and (1 - mean) kappa; variance mean (1 - mean) / (1 + kappa)",
        "Ferrari, S. and Cribari-Neto, F. (2004), Journal of Applied Statistics 31(7), 799-815",
        "auditmean.core.misstatement", "coverage:beta",
    ),
)


def used_here(method: Method, facts: dict[str, Any]) -> bool:
    """Whether this engagement used ``method``, from ``facts`` gathered by the workpaper.

    ``facts`` holds ``stratify`` (the boundary rule), ``allocation``,
    ``std_dev_source``, ``methods`` (the estimators evaluated),
    ``ratio_variance`` (True when a ratio estimator was evaluated),
    ``single_item`` (True when a stratum was given the average variance),
    ``second_opinion`` (True when one was computed), ``coverage`` (True
    when a coverage check is recorded), ``taints`` (their kinds),
    ``minimum`` (the plan's minimum per stratum: ``"checks"`` or a number),
    ``plan_check`` (True when the plan was checked by simulation),
    ``finite_bound`` (True when the evaluation formed the finite-sample
    bound), ``bounds`` (the monetary-unit bounds computed) and ``monetary_size``
    (True when a monetary-unit sample size was computed: the plan's design
    or the plan check's alternative).
    """
    cond = method.used_when
    if cond == "always":
        return True
    key, _, value = cond.partition(":")
    if key == "stratify":
        return facts.get("stratify") == value
    if key == "allocation":
        return facts.get("allocation") == value
    if key == "std_dev_source":
        return facts.get("std_dev_source") == value
    if key == "method":
        return value in facts.get("methods", ())
    if key == "coverage":
        return bool(facts.get("coverage")) if not value else value in facts.get("taints", ())
    if key == "minimum":
        return facts.get("minimum") == value
    if key == "bound":
        return value in facts.get("bounds", ())
    return bool(facts.get(key))


def methods_for(design: str) -> tuple[Method, ...]:
    """The rows of :data:`METHODS` that belong to an engagement of ``design``, in order."""
    return tuple(m for m in METHODS if m.design in (design, "both"))
