"""Plain-language text blocks of the site: cautions, methods, glossary.

Two registers on every page: the plain summary first, the technical detail
below it. Nothing here depends on the data; pages that quote numbers build
their text from :mod:`relspan.analysis.findings`. Text here is Markdown
written by relspan (:class:`~relspan.site.markdown.Raw` where it is composed
into a page as is).
"""

from __future__ import annotations

from relspan.assumptions import ASSUMPTIONS, assumption
from relspan.site.markdown import Raw

__all__ = ["USUAL_CAUTIONS", "CAUTION_LINK", "caution_body", "GLOSSARY", "METHODS", "REFERENCES", "INFERENCE_RULES",
           "ASSUMPTION_PLAIN"]


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


GLOSSARY = (
    ("Corank", "The number of separate linear relations that hold among the variables (after allowing "
     "for measurement error). Corank 2 among 4 variables means two independent equations tie them "
     "together."),
    ("Relation", "A linear equation the variables satisfy up to measurement error, such as "
     "*a*·*x* + *b*·*y* + *c*·*z* = constant."),
    ("Relation subspace", "All the relations together: with two relations, every combination of them is "
     "also a relation, and the set of all of them is a plane. This plane is what the data pin down."),
    ("Elementary regression", "The ordinary least-squares fit that treats one chosen variable as the only "
     "noisy one. With n variables there are n of them; how far they disagree shows how much the noise "
     "assumption matters."),
    ("Noise assumption", "What is assumed about the measurement errors: which variables carry them, how "
     "large they are, whether they are independent. Each assumption can give a different answer."),
    ("Tolerance (eps)", "The largest measurement error the analysis allows, as a share of each variable's "
     "variance (relative) or in the data's units (absolute)."),
    ("Normalised coefficient", "A coefficient of a relation written as an equation for one chosen "
     "variable. Meaningful only when it is identified; see [how to read a single coefficient](/caution.html)."),
    ("Reduced form", "Some variables (as many as there are relations) written through the others. It is "
     "identified once the choice of variables is made."),
    ("Principal angle", "How far apart two subspaces are, in degrees: 0 means the same, 90 means "
     "perpendicular. Used to compare relation subspaces across windows."),
    ("Window", "A stretch of the data (a time span or a run of rows) analysed on its own, so results can "
     "be compared across time."),
    ("Identified", "Pinned down by the data and the stated assumptions alone: a single value, or a set "
     "whose bounds are known."),
) + tuple((a.title, a.glossary) for a in ASSUMPTIONS)


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
     "angle between the relation subspace and the eigenvectors.",
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
     "reported. A variable nearly unrelated to the others can be declared pure noise, which adds one "
     "trivial relation; and up to Ledermann's bound, relations can appear from sampling noise alone.",
     ("frisch1934", "reiersol1941", "kleppe1984", "shapiro1982", "dellariccia1982", "tenberge1991",
      "shapiro2002", "ning2015", "boyd2004", "ledermann1937", "spearman1904", "gini1921")),
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
    ("inference", "Sampling uncertainty: resampling, tests and intervals",
     "The rows of a window are a sample; block resampling keeps the dependence of time-ordered rows.",
     [(r"$X^2 = \nu' \, (k \ln \bar\lambda - \sum_{j \leq k} \ln \lambda_j)$",
       "the statistic for k equal smallest eigenvalues: nu prime times k log of their mean minus the sum of "
       "their logs"),
      (r"$[\,\ell - c\,s_\ell,\ u + c\,s_u\,],\quad \Phi(c + (u - \ell)/\max(s_\ell, s_u)) - \Phi(-c) = \mathrm{level}$",
       "the outer set: lower end minus c standard deviations, upper end plus c standard deviations, with c "
       "from the normal distribution")],
     "Bootstrap intervals are approximate: with few rows, strong dependence or heavy tails they can cover "
     "less often than stated (the block bootstrap underestimates the spread of the smallest eigenvalue under "
     "autocorrelation; measured in docs/inference.md). The equality test assumes Gaussian rows; heavy tails "
     "make it reject too often (Waternaux 1976), and its chi-square reference is approximate on the "
     "correlation scale. Minka's (2000) evidence is kept in the results as a second opinion. Granules of "
     "several rows are resampled whole.",
     ("efron1979", "efron1987", "kuensch1989", "politis1994", "politis2003", "politis2004", "patton2009",
      "lawley1956", "anderson1963", "bartlett1954", "minka2000", "waternaux1976", "davison1997",
      "schoenemann1966", "imbens2004", "chan1979")),
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
    "chi-square with k(k+1)/2 \u2212 1 degrees of freedom, at the 5% level, rows taken as independent) is "
    "applied until it rejects; k eigenvalues also count as equal when all k are at most eps (a common "
    "noise variance at most eps plus a deviation of norm at most eps/2). When all n count as equal, the data "
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
    "Intervals: eigenvalues by the basic bootstrap (Davison & Hinkley 1997), lower ends at least 0; "
    "coefficients, noise variances and noise shares by percentiles (Efron 1979). Relation coefficients "
    "under equal noise: each resample's relation subspace is rotated within itself to the estimate by "
    "orthogonal Procrustes (Schoenemann 1966) and solved for the same variables as the estimate. The "
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
    "schoenemann1966": "Schoenemann, P. H. (1966). A generalized solution of the orthogonal Procrustes "
                       "problem. *Psychometrika*, 31(1), 1–10.",
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
    "bjorck1996": "Björck, Å. (1996). *Numerical Methods for Least Squares Problems*. Philadelphia: SIAM.",
}
