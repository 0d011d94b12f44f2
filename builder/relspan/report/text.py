"""Plain-language text blocks of the site: cautions, methods, glossary.

Two registers on every page: the plain summary first, the technical detail
below it. Nothing here depends on the data; pages that quote numbers build
their text from :mod:`relspan.analysis.findings`. Text here is Markdown
written by relspan (:class:`~relspan.site.markdown.Raw` where it is composed
into a page as is).
"""

from __future__ import annotations

from dataclasses import dataclass

from relspan.analysis.findings.support import SETTLED_RULE
from relspan.assumptions import ASSUMPTIONS, assumption
from relspan.site.markdown import Raw

__all__ = ["USUAL_CAUTIONS", "CAUTION_LINK", "caution_body", "GLOSSARY", "GlossaryEntry", "glossary_terms",
           "METHODS", "REFERENCES", "INFERENCE_RULES", "ASSUMPTION_PLAIN"]


def _heading(assumption_id: str) -> str:
    """Methods-page heading of an assumption: its reader's name and the trade's name of the method."""
    a = assumption(assumption_id)
    return f"{a.title}: {a.method}"


#: the cautions every page that interprets results carries (short form)
USUAL_CAUTIONS = Raw(
    "These results describe **association** in the data, not causation. They rest on the quality of "
    "the data and on the noise assumption stated beside each number. Before any decision, consult a "
    "qualified statistician and follow your institution's own review."
)

#: the link every place that shows a single coefficient carries
CAUTION_LINK = Raw("[How to read a single coefficient](/caution.html)")

#: reader-facing words for each noise assumption: (short name, one sentence)
#: (reader's heading, meaning) per assumption id, from the one table
ASSUMPTION_PLAIN = {a.id: (a.title, a.meaning) for a in ASSUMPTIONS}


def caution_body() -> str:
    """Markdown of the caution page on interpreting single coefficients."""
    return Raw(f"""
## In short

A single coefficient from a model of several variables can look precise and still mean very little.
When the data support **two or more** linear relations at once, no single coefficient of one of
them is determined by the data: every mix of the relations is again a relation, and each mix gives
different coefficients. Even its **sign** can change from one time window to the next while
everything the data do pin down stays put.

{USUAL_CAUTIONS}

## Why one normalised coefficient can mean nothing

Suppose the data satisfy two relations, *A* and *B*. Then *A* + 2*B*, *A* − *B* and any other
combination are satisfied too. Writing "the" equation for one variable picks one member of this
family, and the coefficients you read off depend entirely on which member was picked — usually by
the accident of which variable an estimation method treats as noisy. What the data identify is the
**subspace of relations** (all the combinations together), not any one of its members.

## Why its sign can flip while the subspace is stable

The subspace can stay within a fraction of a degree across windows while the member an estimator
lands on rotates inside it. A coefficient that is positive in one decade and negative in the next
is then no evidence that "the relation changed". Compare the coefficient swing with the subspace
angle on each dataset page before reading anything into a sign.

## What would identify a single coefficient

Only information from outside the data, stated **in advance**: for example, an exclusion
restriction (a variable known not to enter a given relation), a known ratio of noise variances, or
a normalisation fixed by theory. With *q* relations, each relation needs *q* − 1 such restrictions
to be pinned down. relspan reports a **reduced form** (some variables expressed through the others)
because it is identified once the choice of variables is made; that choice is stated beside it,
with how well conditioned it is.

## With one relation

When the data support exactly one relation, its coefficients are pinned down under a fixed noise
assumption, but they still **depend on the assumption**. Under independent noise of unknown size
(the Frisch scheme) they are known only as intervals, and sometimes not bounded at all. The dataset
pages show each coefficient under every assumption side by side.

## The usual cautions

- The data describe association, not causation. A relation among measured variables does not say
  which variable drives which.
- Results depend on data quality (measurement, revisions, definitions that change over time) and on
  the assumptions stated on each page, including the tolerance for noise.
- A tolerance chosen after looking at the results makes every conclusion weaker than it reads.
- For decisions, consult a qualified statistician, and follow your institution's own review process;
  this site does not replace either.
""")


@dataclass(frozen=True, slots=True)
class GlossaryEntry:
    """One glossary entry: the words that count as a use of it, and its text (Markdown)."""

    term: str
    anchor: str
    words: tuple[str, ...]
    text: str


def _entry(term: str, words: tuple[str, ...], text: str, anchor: str = "") -> GlossaryEntry:
    return GlossaryEntry(term, anchor or "-".join(term.lower().replace("(", "").replace(")", "").split()),
                         words, text)


#: every technical term a page may use, with the forms that count as a use; the renderer links the
#: first use on each page to the entry (relspan.site.render.link_terms)
GLOSSARY: tuple[GlossaryEntry, ...] = tuple(sorted((
    _entry("Corank", ("corank", "coranks"),
           "The number of separate linear relations that hold among the variables (after allowing for "
           "measurement error). Corank 2 among 4 variables means two independent equations tie them together."),
    _entry("Relation", ("relation", "relations"),
           "A linear equation the variables satisfy up to measurement error, such as "
           "*a*·*x* + *b*·*y* + *c*·*z* = constant."),
    _entry("Relation subspace", ("relation subspace", "relation subspaces", "subspace of relations",
                                 "plane of relations"),
           "All the relations together: with two relations, every combination of them is also a relation, "
           "and the set of all of them is a plane. This plane is what the data pin down."),
    _entry("Elementary regression", ("elementary regression", "elementary regressions",
                                     "elementary-regression"),
           "The ordinary least-squares fit that treats one chosen variable as the only noisy one. With n "
           "variables there are n of them; how far they disagree shows how much the noise assumption matters."),
    _entry("Noise assumption", ("noise assumption", "noise assumptions"),
           "What is assumed about the measurement errors: which variables carry them, how large they are, "
           "whether they are independent. Each assumption can give a different answer."),
    _entry("Tolerance (eps)", ("tolerance", "tolerances", "eps"),
           "The largest measurement error the analysis allows, as a share of each variable's variance "
           "(relative) or in the data's units (absolute)."),
    _entry("Normalised coefficient", ("normalised coefficient", "normalised coefficients", "single coefficient",
                                      "single coefficients"),
           "A coefficient of a relation written as an equation for one chosen variable. Meaningful only when "
           "it is identified; see [how to read a single coefficient](/caution.html)."),
    _entry("Reduced form", ("reduced form",),
           "Some variables (as many as there are relations) written through the others. It is identified "
           "once the choice of variables is made."),
    _entry("Principal angle", ("principal angle", "principal angles"),
           "How far apart two subspaces are, in degrees: 0 means the same, 90 means perpendicular. Used to "
           "compare relation subspaces across windows (the largest of the angles is quoted)."),
    _entry("Window", ("window", "windows"),
           "A stretch of the data (a time span or a run of rows) analysed on its own, so results can be "
           "compared across time. A window plan says how the data are cut into windows."),
    _entry("Identified", ("identified", "identify", "identifies", "identification"),
           "Pinned down by the data and the stated assumptions alone: a single value, or a set whose bounds "
           "are known."),
    _entry("Undetermined", ("undetermined",),
           "Said of a number of relations that the computation could neither certify nor rule out at the "
           "stated tolerance. The site then says what was certified and leaves the rest open."),
    _entry("Eigenvalue", ("eigenvalue", "eigenvalues"),
           "For a covariance matrix: the variance of the data along one of its independent directions. A "
           "very small eigenvalue means the data hardly vary in that direction, that is, they nearly satisfy "
           "a linear relation there."),
    _entry("Orthant", ("orthant", "orthants"),
           "A region of space where every coordinate keeps one fixed sign (the quadrants of a plane, the "
           "octants of space). Under independent noise with one relation, the coefficients are bounded "
           "exactly when all elementary regressions lie in one orthant (Frisch 1934; Klepper and Leamer 1984)."),
    _entry("Simplex", ("simplex", "simplices"),
           "The smallest convex shape through a set of points: a segment for two points, a triangle for "
           "three. Under independent noise with one relation, the possible relations fill the simplex of "
           "the elementary regressions when they lie in one orthant."),
    _entry("Convex hull", ("convex hull",),
           "All weighted averages (with non-negative weights summing to 1) of a set of points; for points in "
           "general position it is their simplex."),
    _entry("Flat", ("flat", "flats"),
           "A line, plane or higher analogue that need not pass through the origin. With q relations, the "
           "elementary regressions written for one variable lie near a flat of dimension q - 1 (a line for two "
           "relations)."),
    _entry("RMS distance", ("rms distance", "root-mean-square distance"),
           "The root mean square of the distances of points from a fitted line or flat: the square root of "
           "the average squared distance. It grows with the measurement error."),
    _entry("Condition number", ("condition number", "condition numbers"),
           "How much a computed answer can move when the data move slightly: near 1 is well posed, large "
           "values mean small changes in the data can change the answer a lot."),
    _entry("Spectral norm", ("spectral norm",),
           "The size of a matrix as the largest factor by which it can stretch a vector; for a noise "
           "covariance, the largest noise variance in any direction."),
    _entry("Least squares", ("least squares", "least-squares", "ordinary least squares"),
           "Fitting an equation by making the squared errors of one variable as small as possible; it assumes "
           "that only that variable is measured with error."),
    _entry("Total least squares", ("total least squares",),
           "Fitting a relation by making the squared distances of all variables as small as possible; it "
           "assumes equal noise in every variable on the analysed scale (Golub and Van Loan 1980)."),
    _entry("Frisch scheme", ("frisch scheme",),
           "The name in the literature (Frisch 1934) for the analysis under independent noise: every variable "
           "has its own error of unknown size, independent of the others."),
    _entry("Correlation scale", ("correlation scale",),
           "Each variable divided by its own standard deviation in the window, so that every variable has "
           "variance 1; a relative tolerance is a share of that variance."),
    _entry("Claim", ("claim", "claims"),
           "A statement the authors make about the data in the spec (for example, \u201ctwo relations hold "
           "in every ten-year window\u201d) that every build checks again."),
    _entry("Resampling", ("resampling", "bootstrap"),
           "Repeating the analysis on many resamples of the rows (whole blocks of neighbouring rows for data "
           "in time order) to see how much the answer would vary from sample to sample; the methods page "
           "names the scheme used."),
) + tuple(_entry(a.title, (a.name,), a.glossary, anchor=f"noise-{a.id}") for a in ASSUMPTIONS),
    key=lambda e: e.term.lower()))


def glossary_terms():
    """The glossary as the renderer's :class:`~relspan.site.content.Term` records."""
    from relspan.site.content import Term

    return tuple(Term(e.anchor, e.words) for e in GLOSSARY)


#: (key, title, assumption in one sentence, [(formula TeX, alt text in words)], limits, reference keys)
METHODS = (
    ("elementary", _heading("elementary"),
     "One variable at a time is the only noisy one.",
     [(r"$a^{(j)} = P_{j\cdot}/P_{jj},\quad P = S^{-1}$",
       "relation j is row j of the inverse covariance P divided by its diagonal entry"),
      (r"$\hat\beta_{jk} = -P_{jk}/P_{jj},\quad \hat\sigma^2_j = 1/P_{jj}$",
       "least-squares coefficient of x k in the regression of x j is minus P j k over P j j; "
       "residual variance is one over P j j")],
     "Presupposes exactly one relation. With several relations each regression lands on an arbitrary "
     "member of the relation subspace. Exactly collinear data make S singular: relspan then reports the "
     "exact relations (the null space of S) instead. For two variables the two regressions bracket the "
     "slope of every independent-noise answer (Gini 1921).",
     ("frisch1934", "anderson1958", "higham2002", "gini1921")),
    ("equal", _heading("equal"),
     "Every variable carries noise of the same variance on the scale analysed.",
     [(r"$S\,v_i = \lambda_i v_i,\quad \lambda_1 \leq \cdots \leq \lambda_n$",
       "eigenvectors v i of S with eigenvalues in ascending order"),
      (r"$\mathrm{relations} = \mathrm{span}(v_1,\ldots,v_q),\quad \hat\sigma^2 = (\lambda_1 + \cdots + \lambda_q)/q$",
       "the relations span the eigenvectors of the q smallest eigenvalues; the noise variance is the "
       "mean of those q eigenvalues")],
     "Not invariant to the units: relspan analyses a stated scale (the correlation scale when the "
     "tolerance is relative). The corank is the number of smallest eigenvalues that are equal, decided by "
     "a test (see Sampling uncertainty), not by a count of eigenvalues below eps.",
     ("eckart1936", "golub1980", "tipping1999")),
    ("shaped", _heading("shaped"),
     "Noise variances are known up to one common factor: N = s\u00b2 W.",
     [(r"$S\,v = \lambda\,W v$", "S v equals lambda times W v, with W the known noise shape")],
     "Only as good as the stated shape W; for two variables this is Deming regression.",
     ("koopmans1937", "deming1943")),
    ("bounded", _heading("bounded"),
     "The noise covariance may have any shape but its spectral norm is at most eps.",
     [(r"$q\ \mathrm{admissible}\ \Leftrightarrow\ \lambda_q(S) \leq \varepsilon$",
       "corank q is admissible exactly when the q-th smallest eigenvalue of S is at most eps"),
      (r"$\sin\theta \leq \varepsilon / \lambda_{q+1}(S)$",
       "the sine of the largest angle to the eigenvector subspace is at most eps over the next eigenvalue")],
     "The angle bound is vacuous when eps approaches the next eigenvalue; it bounds the largest principal "
     "angle between the relation subspace and the eigenvectors. It is a population bound: it treats the "
     "sample covariance as the population's, and sampling adds cross-products of signal and noise that "
     "eps does not bound, so the site shows the bootstrap spread of the same subspace beside it.",
     ("weyl1912", "daviskahan1970", "stewart1990")),
    ("diagonal", _heading("diagonal"),
     "Each variable has independent noise of unknown variance: N = diag(d), d \u2265 0, S \u2212 N "
     "positive semidefinite.",
     [(r"$0 \leq d_j \leq 1/P_{jj}$", "each noise variance d j lies between 0 and one over P j j"),
      (r"$q = 1:\ P_{ij}P_{jk}P_{ki} > 0\ \mathrm{for\ all}\ i,j,k\ \Rightarrow\ \mathrm{hull\ of\ "
       r"elementary\ regressions}$",
       "with one relation, if every product P i j P j k P k i is positive, the solutions are the convex hull "
       "of the elementary regressions"),
      (r"$\mathrm{point\ identification\ needs}\ q(q+1) \geq 2n$",
       "point identification needs q times q plus one to be at least 2 n")],
     "With one relation the coefficients are bounded only when all elementary regressions lie in one "
     "orthant. For several relations relspan searches for the largest corank by minimum-trace and "
     "minimum-rank factor analysis from several starts and states a certificate, a proof of "
     "impossibility, or \u201cundetermined at eps\u201d. The weighted minimum-trace problems are solved by "
     "a log-barrier interior-point method. When q(q+1) < 2n the solutions form a family, whose spread is "
     "reported. When q(q+1) = 2n the solutions are isolated but need not be unique, so relspan searches "
     "for a second one and says \u201clocally identified\u201d unless it finds one. A certificate allows "
     "S \u2212 N to be indefinite by at most eps; an absolute tolerance e is applied as e over the largest "
     "variance for certificates and e over the smallest for proofs of impossibility. A variable nearly unrelated to the others can be declared pure noise, which adds one "
     "trivial relation; and up to Ledermann's bound, relations can appear from sampling noise alone.",
     ("frisch1934", "reiersol1941", "kleppe1984", "shapiro1982", "dellariccia1982", "tenberge1991",
      "shapiro2002", "ning2015", "boyd2004", "ledermann1937", "spearman1904", "gini1921", "wilson1939",
      "bekker1997")),
    ("identified", "What is identified: subspace, reduced form, single coefficients",
     "Only what is the same for every admissible answer is identified; everything else is a choice.",
     [(r"$A = [\,I_q \;\; -B\,]\,\Pi$",
       "the relation basis A is solved for q chosen variables, giving the reduced-form coefficients B; Pi "
       "orders the variables")],
     "With q relations, a single relation is identified only with q minus 1 restrictions from outside the "
     "data. The q variables of the reduced form are chosen by QR with column pivoting so that the choice "
     "is well conditioned; the condition number is reported beside it.",
     ("koopmans1950", "businger1965")),
    ("angles", "Principal angles between subspaces",
     "Two relation subspaces are compared by the angles between them.",
     [(r"$\theta_i = \mathrm{atan2}(\sigma_i((I - Q_A Q_A^T)Q_B),\ \sigma_i(Q_A^T Q_B))$",
       "each principal angle is atan2 of a singular value of the residual projection and of the cosine "
       "matrix")],
     "Sines and cosines are both computed so that small angles keep their accuracy.",
     ("bjorck1973", "knyazev2002")),
    ("stability", "Change across windows, judged against resampling",
     "Windows are compared only where each shows the same determined number of relations; a change is an "
     "angle larger than sampling alone produces.",
     [(r"$\theta_{ij} > c^{*}\, Q_{0.95}(\theta^{*}_{ij})$",
       "the angle between windows i and j counts as a change when it exceeds its own resampled 95% "
       "quantile times the family's critical ratio c star")],
     "Each window is taken at its own corank. Compared: neighbouring windows, each window and the full "
     "sample, and every pair of windows in plans of at most 40 windows (the cost then grows only linearly "
     "with the number of windows). The null draws of a comparison are the angles between the two windows' "
     "bootstrap subspaces after the second is carried onto the first estimate by the direct rotation "
     "(Davis & Kahan), so they show what sampling alone produces when nothing changes; the full sample is "
     "treated as fixed. All comparisons of a plan are judged together by the max-T rule: each angle is "
     "divided by the 95% quantile of its own null draws, and the critical ratio c* is the 95% quantile, "
     "over resamples, of the largest such ratio in the family, so a plan raises a false alarm about 5% of "
     "the time however many windows it has. Windows whose corank is undetermined, or zero, are not "
     "compared and are no evidence of change; a different number of relations counts as a change only "
     "when no count has at least 5% resampling support in both windows. Under independent noise the "
     "answer in a window is a set or family of subspaces, and one member of it is no answer: windows are "
     "not compared by an angle there.",
     ("bjorck1973", "daviskahan1970", "westfall1993")),
    ("breaks", "Breaks at unknown dates",
     "The relation subspace may change at dates the data must reveal.",
     [(r"$\sup_{t}\ T \, \ln(S_0(t) / S_1(t))$",
       "the supremum over candidate dates t of T times the log of S0 over S1, where S1 is the misfit (sum of "
       "the q smallest eigenvalues of the co-moment matrix) of separate relation subspaces before and after "
       "t, and S0 that of one subspace common to both sides")],
     "All on one scale: each variable divided by its standard deviation over the whole sample (or the "
     "data's units under an absolute tolerance); each side keeps its own mean. The misfit is the total "
     "least squares residual sum of squares, so the statistic is the likelihood-ratio form of the equal-"
     "noise model, the counterpart of Andrews' sup-LR test: a relation that fits well on each side but not "
     "across makes it large. Candidate dates leave out the first and last 15% of the rows. The null comes "
     "from bootstrap resamples of the sample turned so that no change holds: at the most likely date each "
     "side is rotated about its own mean by the direct rotation (Davis & Kahan) that carries its relation "
     "subspace onto the common one, and moved to the overall mean, so every row keeps the size of its "
     "misfit; rows are drawn from it with replacement. A break is declared when the p-value (one plus the "
     "resamples at or above the statistic, over one plus their number) is at most 5%; the critical value "
     "shown is the resampled statistic at that boundary. For time-ordered rows each observed statistic is "
     "first divided by the long-run variance ratio of the fit's scores (misfit times the coordinates along "
     "the relations' complement), as Andrews' statistics use a long-run covariance: serial dependence "
     "inflates the statistic by that factor and the resamples carry none. Each score series is prewhitened "
     "by an AR(1) filter (Andrews & Monahan; its coefficient corrected for small-sample bias as Kendall "
     "gives) and the residuals' long-run variance taken with the flat-top lag window and Politis' "
     "bandwidth; the ratio is at least 1. Several breaks are sought one at a time (Bai; the sequential "
     "procedure of Bai & Perron): after a break is found, each segment between the breaks found so far is "
     "scanned the same way, with its own resamples, candidate dates leaving at least 15% of the whole "
     "sample's rows on each side (a shorter segment is not tested: a break there cannot be judged), and the "
     "long-run ratio of the whole sample under the breaks found; with l breaks found each of the l + 1 "
     "segments is tested at the level 1 - 0.95^(1/(l + 1)) (Šidák; 2.5% each for two segments), so that a "
     "further false break is declared with a chance of about 5% when the segments hold none, and the "
     "segment with the smallest p-value gets the next break, up to five. Each break's date is then the most "
     "likely one between its neighbours; its interval comes from resampling the two sides separately, in "
     "stationary blocks for time-ordered rows; the angle reported is the largest principal angle between "
     "the neighbouring segments' subspaces. The scan follows the eigenvector subspace (equal and bounded "
     "noise) at the full sample's corank, or, where the full sample shows no relation, at the corank most "
     "windows show. Measured on simulated data (3 series, one relation, nominal level 5%, 200 samples "
     "each): false alarms in 10 of 200 stable samples of 300 independent rows, 11 of 200 with autocorrelated rows (AR(1), coefficient 0.5; 16 of 200 with 800 rows) and 12 of 200 with coefficient 0.8; a turn of 14 degrees at mid-sample was found in all 200 samples with independent rows, 199 of 200 with coefficient 0.5 and 166 of 200 with 0.8; with "
     "that one break, a second was reported in 12, 8 and 7 of 200; with two such turns, both were found in 198 of 200 with independent rows and 181 of 200 with coefficient 0.5. "
     "So on these simulations false alarms stay between 5% and 8% under serial dependence, strongly autocorrelated rows cost detection, and the date intervals cover the true date less often than their 95% when rows are autocorrelated (173 and 133 of 200 at 0.5 and 0.8; 185 with independent rows).",
     ("andrews1993", "andrewsmonahan1992", "kendall1954", "bai1997", "baiperron1998", "sidak1967",
      "politis1994", "politis2003", "politis2004", "daviskahan1970", "eckart1936")),
    ("inference", "Sampling uncertainty: resampling, tests and intervals",
     "The rows of a window are a sample; block resampling keeps the dependence of time-ordered rows.",
     [(r"$X^2 = \nu' \, (k \ln \bar\lambda - \sum_{j \leq k} \ln \lambda_j)$",
       "the statistic for k equal smallest eigenvalues: nu prime times k log of their mean minus the sum of "
       "their logs"),
      (r"$[\,\ell - c\,s_\ell,\ u + c\,s_u\,],\quad \Phi(c + (u - \ell)/\max(s_\ell, s_u)) - \Phi(-c) = \mathrm{level}$",
       "the outer set: lower end minus c standard deviations, upper end plus c standard deviations, with c "
       "from the normal distribution")],
     "Bootstrap intervals are approximate: with few rows, strong dependence or heavy tails they can cover "
     "less often than stated. In simulations with autocorrelated rows (AR(1), coefficient 0.5, 400 and 800 "
     "rows, 3000 datasets each) basic 90% intervals of the smallest eigenvalue covered the truth in 85-86% "
     "of datasets: the block bootstrap's spread came out about a tenth too small, and varied from sample to "
     "sample, whatever the block length (measured in docs/inference.md). For time-ordered rows the "
     "eigenvalue intervals on this site are therefore studentised (Hall 1988): each block resample is "
     "standardised by its own standard error from its blocks (Goetze & Kuensch 1996), resamples made of a "
     "single block (the window itself, rotated) are left out, and the interval is scaled by a flat-top "
     "lag-window standard error (Politis & Romano 1995); in the same simulations they covered 87-89%, and "
     "the coefficient and angle intervals (percentile and basic) 86-87%. Short windows of strongly "
     "dependent rows cover less: with 100 rows and AR(1) coefficient 0.9 the studentised eigenvalue "
     "interval covered 66% and the basic one 39%. The equality test assumes Gaussian rows: heavy tails "
     "(Waternaux 1976) make it reject too often; autocorrelation did too with rows taken as independent (in "
     "simulations with AR(1) coefficient 0.5, about one true equality in five), and with the effective "
     "sample size it rejected 5.3% and 4.6% of true equalities at 400 and 2000 rows (1000 datasets each), "
     "at a cost in power against small unequal noise at 400 rows (benchmarks/inference_checks.py corank); its "
     "chi-square reference is approximate on the correlation scale (6-9% rejections at the 5% level in "
     "simulations). Minka's (2000) evidence is kept in the results as a second opinion. Granules of "
     "several rows are resampled whole.",
     ("efron1979", "efron1987", "kuensch1989", "politis1994", "politis2003", "politis2004", "patton2009",
      "lawley1956", "anderson1963", "bartlett1954", "bartlett1946", "minka2000", "waternaux1976", "davison1997",
      "imbens2004", "chan1979", "weyl1912", "hall1988", "goetze1996", "politis1995")),
    ("moments", "Window statistics from mergeable blocks",
     "Windows are merged from block statistics, never recomputed from raw rows.",
     [(r"$m = m_A + \delta\,n_B/n,\quad C = C_A + C_B + \delta\delta^T n_A n_B / n$",
       "merged mean and co-moment of two blocks A and B, with delta the difference of their means")],
     "Blocks form their deviations and co-moments in double-double arithmetic (error-free sums and "
     "products), windows are merged pairwise without subtraction, and the elementary regressions refine "
     "their inverse against the extra-precision covariance: the NIST StRD Longley slopes come out with "
     "at least 12 correct digits.",
     ("chan1979", "chan1983", "welford1962", "bjorck1996", "dekker1971", "knuth1997", "ogita2005",
      "ozaki2012")),
    ("trends", "Trends and autocorrelation",
     "Rows are in time order; each analysed series is tested for a trend on its own.",
     [(r"$n_{\mathrm{eff}} = T\,(1 - r_i r_j)/(1 + r_i r_j)$",
       "effective rows are T times one minus r i r j over one plus r i r j, with r the lag-1 "
       "autocorrelations; the smallest pair is reported")],
     "Each series gets the augmented Dickey-Fuller (ADF) test (null: a unit root; constant; lagged "
     "differences up to 12 (T/100)^(1/4), their number chosen by AIC; p-value from MacKinnon's response "
     "surface) and the KPSS test (null: level stationarity; Bartlett long-run variance (Newey and West) with "
     "the bandwidth of Hobijn, Franses and Ooms, after Newey and West's automatic rule; p-value interpolated in the authors' table of critical values, so held "
     "between 0.01 and 0.10), both at 5%: stationary when ADF rejects and KPSS does not, "
     "trending when KPSS rejects and ADF does not, otherwise cannot be judged. When two or more analysed "
     "series trend, relations among their levels can appear without any real relation (spurious regression) "
     "unless they are cointegrated, which is not tested: the dataset page says so and the build raises a "
     "warning when they are analysed in levels (transform none, log, demean or standardise; diff and logdiff "
     "analyse changes, detrend removes a least-squares straight line in time fitted on the time values). "
     "Differences are taken only between consecutive periods, so a gap in the time index drops the row "
     "after it. For very large datasets the tests run on means of consecutive runs of rows (said on the "
     "page).",
     ("dickey1979", "said1984", "schwert1989", "akaike1974", "mackinnon1994", "kwiatkowski1992", "newey1987",
      "newey1994", "hobijn2004",
      "granger1974", "bartlett1946", "bretherton1999")),
    ("influence", "Single rows and blocks of rows",
     "No single row or block of rows should decide a finding; the check says when one does.",
     [(r"$\min_{|H| = h}\ \det\,\mathrm{cov}(x_H),\quad h = \lfloor (T + n + 1)/2 \rfloor$",
       "the minimum covariance determinant estimate uses the h rows whose covariance has the smallest "
       "determinant")],
     "The full-sample counts under equal, known-shape and bounded noise are decided again with each of up "
     "to 20 contiguous blocks of rows left out, from the covariance of a robust fit (Minimum Covariance "
     "Determinant by FAST-MCD: 500 random starts, which above 600 rows and below 75 variables run in up "
     "to five random subsets of 300 rows that are then merged, as the algorithm's authors prescribe for "
     "large datasets, or on all rows where a subset holds an exact fit; "
     "concentration steps, consistency factor and reweighting at the 97.5% chi-square quantile), and "
     "without the rows that fit flags as outlying (the most outlying row alone first; then all flagged "
     "rows when they are at most 5% of the rows). A count that changes is said to rest on that block, row "
     "or few rows. Independent noise is not re-run (its search is slow). The robust fit needs single rows, "
     "so very large datasets, pooled into granules, get only the block check.",
     ("rousseeuw1984", "rousseeuw1999")),
)

#: the resampling and test rules (methods page), one per line; defaults as in the spec's checks.resampling
INFERENCE_RULES = (
    "Resampling: each window is resampled from its stored granule statistics (a resample is a merge of "
    "stored moments; no row is read again): by default 499 resamples per window (checks.resampling.resamples; "
    "0 turns intervals off and the pages say so), intervals at the 90% level (checks.resampling.level), the "
    "stationary bootstrap (Politis & Romano 1994) when the dataset has a time column and the bootstrap of "
    "single rows (Efron 1979) otherwise, or moving blocks (Kuensch 1989) on request; the block length by the "
    "rule of Politis & White (2004) with the correction of Patton, Politis & White (2009), the largest over "
    "the variables. Each window has its own random stream from (seed, dataset, plan, window position), so "
    "the numbers do not depend on how many processes run or on the cache.",
    "Corank under equal noise: the number of smallest eigenvalues (on the analysed scale) that are equal. "
    "Starting from k = 2, the test that the k smallest eigenvalues are equal (Lawley 1956; Anderson 1963; "
    "chi-square with k(k+1)/2 \u2212 1 degrees of freedom, at the 5% level) is applied until it rejects. "
    "With time-ordered rows its sample size is the effective one: the T rows divided by the largest "
    "(1 + r_a r_b)/(1 \u2212 r_a r_b) over the k tested eigen-components, r their lag-1 autocorrelations "
    "(Bartlett 1946: the variance inflation of a sample covariance of two AR(1)-like series, the factor of "
    "the trends section), the same on the full sample, each window and each block resample (read against "
    "the window's lag-1 autocovariance, since block resamples keep its dependence); unordered rows keep T. "
    "With granules of several rows the lag-1 autocorrelation is that of granule means, which sees only "
    "dependence between granules, so the correction is then smaller than the rows call for; k eigenvalues also count as equal when they lie within eps of one another "
    "(the k-th smallest minus the smallest at most eps: equal noise of any size plus a deviation of norm at "
    "most eps/2, by Weyl's inequality), so near-exact relations whose tiny noise variances differ are not "
    "lost, and the size of the common noise variance never enters. When all n count as equal, the data "
    "show nothing but equal noise and no relation is reported. Corank 1 fits "
    "equal noise whatever the data, so one relation is reported only when the smallest eigenvalue is at "
    "most eps; otherwise no relation. The shares of resamples giving each corank are its support.",
    "Corank under bounded noise: corank q is admissible when the q-th smallest eigenvalue is at most eps "
    "(Weyl); the support is the share of resamples in which each q is the largest admissible one. "
    "Admissible means the data allow that many relations within the tolerance, not that they are shown.",
    "Corank under independent noise: the largest corank with an existence certificate (undetermined when "
    "a larger one is neither certified nor ruled out); its support comes from a search of one start on "
    "each of the first 99 resamples (checks.resampling.diagonal_resamples), computed for the full sample "
    "and for full-sample and named-period plans only: rolling and expanding windows get none, because each "
    "resample needs a search of its own (about a hundred times the cost of the other intervals), and "
    "their pages say so.",
    "Counts in sentences: " + SETTLED_RULE + " Bounded noise gives the share of resamples in which the "
    "count is admissible (when the support is split, or for no relation, the share in which it is the "
    "largest admissible count); where no support was computed the sentence says so.",
    "Intervals: eigenvalues of time-ordered windows by the blockwise studentised bootstrap (Hall 1988; "
    "Goetze & Kuensch 1996; Politis & Romano 1995): resamples made of a single block (a rotation of the "
    "window, with no standard error of its own) are left out, and standard errors at most 1e-8 of the "
    "window's largest eigenvalue count as zero (not resolved from rounding), so an eigenvalue of an exact "
    "relation gets the basic interval. Unordered rows get the basic bootstrap (Davison & Hinkley 1997). "
    "Lower ends at least 0; "
    "coefficients, noise variances and noise shares by percentiles (Efron 1979). Relation coefficients "
    "under equal noise: each resample's relation subspace is solved for the same variables as the "
    "estimate (its reduced form, which does not depend on the basis chosen within the subspace). The "
    "noise shares under independent noise describe the certificate found, over the resamples that "
    "certify the same corank.",
    "Plans with more than 200 windows resample each window at most 199 times (cost grows with the "
    "windows; shares and 90% intervals are still supported by that many resamples); the full sample keeps "
    "the spec's number.",
    "Outer set under independent noise (one relation): each coefficient's identified range [lower, upper] "
    "is widened to [lower \u2212 c sd(lower), upper + c sd(upper)], the standard deviations over resamples "
    "and c solving \u03a6(c + (upper \u2212 lower)/max sd) \u2212 \u03a6(\u2212c) = level (Imbens & Manski "
    "2004): it covers the true coefficient at the stated level. A side stays unbounded when the range is "
    "unbounded in more than half of 1 \u2212 level of the resamples.",
)

REFERENCES = {
    "efron1979": "Efron, B. (1979). Bootstrap methods: another look at the jackknife. *Annals of Statistics*, "
                 "7(1), 1–26.",
    "efron1987": "Efron, B. (1987). Better bootstrap confidence intervals. *Journal of the American "
                 "Statistical Association*, 82(397), 171–185.",
    "kuensch1989": "Kuensch, H. R. (1989). The jackknife and the bootstrap for general stationary "
                   "observations. *Annals of Statistics*, 17(3), 1217–1241.",
    "politis1994": "Politis, D. N. & Romano, J. P. (1994). The stationary bootstrap. *Journal of the American "
                   "Statistical Association*, 89(428), 1303–1313.",
    "hall1988": "Hall, P. (1988). Theoretical comparison of bootstrap confidence intervals. *Annals of "
                "Statistics*, 16(3), 927–953.",
    "goetze1996": "Goetze, F. & Kuensch, H. R. (1996). Second-order correctness of the blockwise bootstrap for "
                  "stationary observations. *Annals of Statistics*, 24(5), 1914–1933.",
    "politis1995": "Politis, D. N. & Romano, J. P. (1995). Bias-corrected nonparametric spectral estimation. "
                   "*Journal of Time Series Analysis*, 16(1), 67–103.",
    "politis2003": "Politis, D. N. (2003). Adaptive bandwidth choice. *Journal of Nonparametric Statistics*, "
                   "15(4–5), 517–533.",
    "politis2004": "Politis, D. N. & White, H. (2004). Automatic block-length selection for the dependent "
                   "bootstrap. *Econometric Reviews*, 23(1), 53–70.",
    "patton2009": "Patton, A., Politis, D. N. & White, H. (2009). Correction to \u201cAutomatic block-length "
                  "selection for the dependent bootstrap\u201d. *Econometric Reviews*, 28(4), 372–375.",
    "lawley1956": "Lawley, D. N. (1956). Tests of significance for the latent roots of covariance and "
                  "correlation matrices. *Biometrika*, 43(1/2), 128–136.",
    "anderson1963": "Anderson, T. W. (1963). Asymptotic theory for principal component analysis. *Annals of "
                    "Mathematical Statistics*, 34(1), 122–148.",
    "bartlett1954": "Bartlett, M. S. (1954). A note on the multiplying factors for various chi-square "
                    "approximations. *Journal of the Royal Statistical Society B*, 16(2), 296–298.",
    "minka2000": "Minka, T. P. (2000). Automatic choice of dimensionality for PCA. *Advances in Neural "
                 "Information Processing Systems*, 13, 598–604.",
    "waternaux1976": "Waternaux, C. M. (1976). Asymptotic distribution of the sample roots for a nonnormal "
                     "population. *Biometrika*, 63(3), 639–645.",
    "davison1997": "Davison, A. C. & Hinkley, D. V. (1997). *Bootstrap Methods and their Application*. "
                   "Cambridge: Cambridge University Press.",
    "imbens2004": "Imbens, G. W. & Manski, C. F. (2004). Confidence intervals for partially identified "
                  "parameters. *Econometrica*, 72(6), 1845–1857.",
    "frisch1934": "Frisch, R. (1934). *Statistical Confluence Analysis by Means of Complete Regression "
                  "Systems*. Oslo: University Institute of Economics.",
    "reiersol1941": "Reiersøl, O. (1941). Confluence analysis by means of lag moments and other methods of "
                    "confluence analysis. *Econometrica*, 9(1), 1–24.",
    "kleppe1984": "Klepper, S. & Leamer, E. E. (1984). Consistent sets of estimates for regressions with "
                  "errors in all variables. *Econometrica*, 52(1), 163–183.",
    "eckart1936": "Eckart, C. & Young, G. (1936). The approximation of one matrix by another of lower rank. "
                  "*Psychometrika*, 1(3), 211–218.",
    "golub1980": "Golub, G. H. & Van Loan, C. F. (1980). An analysis of the total least squares problem. "
                 "*SIAM Journal on Numerical Analysis*, 17(6), 883–893.",
    "koopmans1937": "Koopmans, T. C. (1937). *Linear Regression Analysis of Economic Time Series*. "
                    "Haarlem: De Erven F. Bohn.",
    "deming1943": "Deming, W. E. (1943). *Statistical Adjustment of Data*. New York: Wiley.",
    "weyl1912": "Weyl, H. (1912). Das asymptotische Verteilungsgesetz der Eigenwerte linearer partieller "
                "Differentialgleichungen. *Mathematische Annalen*, 71, 441–479.",
    "daviskahan1970": "Davis, C. & Kahan, W. M. (1970). The rotation of eigenvectors by a perturbation. III. "
                      "*SIAM Journal on Numerical Analysis*, 7(1), 1–46.",
    "shapiro1982": "Shapiro, A. (1982). Rank-reducibility of a symmetric matrix and sampling theory of "
                   "minimum trace factor analysis. *Psychometrika*, 47(2), 187–199.",
    "dellariccia1982": "Della Riccia, G. & Shapiro, A. (1982). Minimum rank and minimum trace of covariance "
                       "matrices. *Psychometrika*, 47(4), 443–448.",
    "tenberge1991": "ten Berge, J. M. F. & Kiers, H. A. L. (1991). A numerical approach to the approximate "
                    "and the exact minimum rank of a covariance matrix. *Psychometrika*, 56(2), 309–315.",
    "shapiro2002": "Shapiro, A. & ten Berge, J. M. F. (2002). Statistical inference of minimum rank factor "
                   "analysis. *Psychometrika*, 67(1), 79–94.",
    "ning2015": "Ning, L., Georgiou, T. T., Tannenbaum, A. & Boyd, S. P. (2015). Linear models based on "
                "noisy data and the Frisch scheme. *SIAM Review*, 57(2), 167–197.",
    "ledermann1937": "Ledermann, W. (1937). On the rank of the reduced correlational matrix in multiple-"
                     "factor analysis. *Psychometrika*, 2(2), 85–93.",
    "wilson1939": "Wilson, E. B. & Worcester, J. (1939). The resolution of six tests into three general "
                  "factors. *Proceedings of the National Academy of Sciences*, 25(2), 73–77.",
    "bekker1997": "Bekker, P. A. & ten Berge, J. M. F. (1997). Generic global identification in factor "
                  "analysis. *Linear Algebra and its Applications*, 264, 255–263.",
    "spearman1904": "Spearman, C. (1904). \u201cGeneral intelligence,\u201d objectively determined and "
                    "measured. *American Journal of Psychology*, 15(2), 201–292.",
    "bjorck1973": "Björck, Å. & Golub, G. H. (1973). Numerical methods for computing angles between linear "
                  "subspaces. *Mathematics of Computation*, 27(123), 579–594.",
    "chan1979": "Chan, T. F., Golub, G. H. & LeVeque, R. J. (1979). Updating formulae and a pairwise "
                "algorithm for computing sample variances. Technical Report STAN-CS-79-773, Stanford "
                "University.",
    "welford1962": "Welford, B. P. (1962). Note on a method for calculating corrected sums of squares and "
                   "products. *Technometrics*, 4(3), 419–420.",
    "gini1921": "Gini, C. (1921). Sull'interpolazione di una retta quando i valori della variabile "
                "indipendente sono affetti da errori accidentali. *Metron*, 1, 63–82.",
    "anderson1958": "Anderson, T. W. (1958). *An Introduction to Multivariate Statistical Analysis*. New York: "
                    "Wiley.",
    "dekker1971": "Dekker, T. J. (1971). A floating-point technique for extending the available precision. "
                  "*Numerische Mathematik*, 18, 224–242.",
    "knuth1997": "Knuth, D. E. (1997). *The Art of Computer Programming, Vol. 2: Seminumerical Algorithms* "
                 "(3rd ed.). Reading, MA: Addison-Wesley.",
    "ogita2005": "Ogita, T., Rump, S. M. & Oishi, S. (2005). Accurate sum and dot product. *SIAM Journal on "
                 "Scientific Computing*, 26(6), 1955–1988.",
    "ozaki2012": "Ozaki, K., Ogita, T., Oishi, S. & Rump, S. M. (2012). Error-free transformations of matrix "
                 "multiplication by using fast routines of matrix multiplication and its applications. "
                 "*Numerical Algorithms*, 59(1), 95–118.",
    "higham2002": "Higham, N. J. (2002). *Accuracy and Stability of Numerical Algorithms* (2nd ed.). "
                  "Philadelphia: SIAM.",
    "tipping1999": "Tipping, M. E. & Bishop, C. M. (1999). Probabilistic principal component analysis. "
                   "*Journal of the Royal Statistical Society B*, 61(3), 611–622.",
    "stewart1990": "Stewart, G. W. & Sun, J.-G. (1990). *Matrix Perturbation Theory*. Boston: Academic Press.",
    "boyd2004": "Boyd, S. & Vandenberghe, L. (2004). *Convex Optimization*. Cambridge: Cambridge University "
                "Press.",
    "koopmans1950": "Koopmans, T. C. & Reiersøl, O. (1950). The identification of structural "
                    "characteristics. *Annals of Mathematical Statistics*, 21(2), 165–181.",
    "businger1965": "Businger, P. & Golub, G. H. (1965). Linear least squares solutions by Householder "
                    "transformations. *Numerische Mathematik*, 7, 269–276.",
    "knyazev2002": "Knyazev, A. V. & Argentati, M. E. (2002). Principal angles between subspaces in an "
                   "A-based scalar product: algorithms and perturbation estimates. *SIAM Journal on "
                   "Scientific Computing*, 23(6), 2008–2040.",
    "chan1983": "Chan, T. F., Golub, G. H. & LeVeque, R. J. (1983). Algorithms for computing the sample "
                "variance: analysis and recommendations. *The American Statistician*, 37(3), 242–247.",
    "westfall1993": "Westfall, P. H. & Young, S. S. (1993). *Resampling-Based Multiple Testing: Examples "
                    "and Methods for p-Value Adjustment*. New York: Wiley.",
    "andrewsmonahan1992": "Andrews, D. W. K. & Monahan, J. C. (1992). An improved heteroskedasticity and "
                          "autocorrelation consistent covariance matrix estimator. *Econometrica*, 60(4), 953–966.",
    "kendall1954": "Kendall, M. G. (1954). Note on bias in the estimation of autocorrelation. *Biometrika*, "
                   "41(3–4), 403–404.",
    "bai1997": "Bai, J. (1997). Estimating multiple breaks one at a time. *Econometric Theory*, 13(3), 315–352.",
    "sidak1967": "Šidák, Z. (1967). Rectangular confidence regions for the means of multivariate normal "
                 "distributions. *Journal of the American Statistical Association*, 62(318), 626–633.",
    "andrews1993": "Andrews, D. W. K. (1993). Tests for parameter instability and structural change with "
                   "unknown change point. *Econometrica*, 61(4), 821–856.",
    "baiperron1998": "Bai, J. & Perron, P. (1998). Estimating and testing linear models with multiple "
                     "structural changes. *Econometrica*, 66(1), 47–78.",
    "bjorck1996": "Björck, Å. (1996). *Numerical Methods for Least Squares Problems*. Philadelphia: SIAM.",
    "dickey1979": "Dickey, D. A. & Fuller, W. A. (1979). Distribution of the estimators for autoregressive time "
                  "series with a unit root. *Journal of the American Statistical Association*, 74(366), 427–431.",
    "said1984": "Said, S. E. & Dickey, D. A. (1984). Testing for unit roots in autoregressive-moving average "
                "models of unknown order. *Biometrika*, 71(3), 599–607.",
    "schwert1989": "Schwert, G. W. (1989). Tests for unit roots: a Monte Carlo investigation. *Journal of "
                   "Business & Economic Statistics*, 7(2), 147–159.",
    "akaike1974": "Akaike, H. (1974). A new look at the statistical model identification. *IEEE Transactions "
                  "on Automatic Control*, 19(6), 716–723.",
    "mackinnon1994": "MacKinnon, J. G. (1994). Approximate asymptotic distribution functions for unit-root and "
                     "cointegration tests. *Journal of Business & Economic Statistics*, 12(2), 167–176.",
    "newey1987": "Newey, W. K. & West, K. D. (1987). A simple, positive semi-definite, heteroskedasticity and "
                 "autocorrelation consistent covariance matrix. *Econometrica*, 55(3), 703–708.",
    "newey1994": "Newey, W. K. & West, K. D. (1994). Automatic lag selection in covariance matrix estimation. "
                 "*Review of Economic Studies*, 61(4), 631–653.",
    "hobijn2004": "Hobijn, B., Franses, P. H. & Ooms, M. (2004). Generalizations of the KPSS-test for "
                  "stationarity. *Statistica Neerlandica*, 58(4), 483–502.",
    "kwiatkowski1992": "Kwiatkowski, D., Phillips, P. C. B., Schmidt, P. & Shin, Y. (1992). Testing the null "
                       "hypothesis of stationarity against the alternative of a unit root. *Journal of "
                       "Econometrics*, 54(1–3), 159–178.",
    "granger1974": "Granger, C. W. J. & Newbold, P. (1974). Spurious regressions in econometrics. *Journal of "
                   "Econometrics*, 2(2), 111–120.",
    "bartlett1946": "Bartlett, M. S. (1946). On the theoretical specification and sampling properties of "
                    "autocorrelated time-series. *Journal of the Royal Statistical Society Supplement*, 8(1), "
                    "27–41.",
    "bretherton1999": "Bretherton, C. S., Widmann, M., Dymnikov, V. P., Wallace, J. M. & Bladé, I. (1999). The "
                      "effective number of spatial degrees of freedom of a time-varying field. *Journal of "
                      "Climate*, 12(7), 1990–2009.",
    "rousseeuw1984": "Rousseeuw, P. J. (1984). Least median of squares regression. *Journal of the American "
                     "Statistical Association*, 79(388), 871–880.",
    "rousseeuw1999": "Rousseeuw, P. J. & Van Driessen, K. (1999). A fast algorithm for the minimum covariance "
                     "determinant estimator. *Technometrics*, 41(3), 212–223.",
}
