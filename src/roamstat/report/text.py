"""Fixed prose of the report: methods, references, cautions (trusted HTML, no data in it)."""

from __future__ import annotations

def methods_html(nulls) -> str:
    """The methods text, naming the families, range methods and the null models of this run.

    The lists come from the registries (``models.steps.FAMILIES``, ``models.turns.TURN_FAMILIES``,
    ``registry.NULLS``, ``ranges.estimate.RANGE_METHODS``), so a new entry appears here by itself.
    """
    from roamstat.models.steps import FAMILIES
    from roamstat.models.turns import TURN_FAMILIES
    from roamstat.ranges.estimate import RANGE_METHODS
    from roamstat.registry import NULLS

    null_text = _and([NULLS[n].methods for n in nulls if n in NULLS]) or "no null walk (none was run)"
    return f"""
<p>Fixes were screened by explicit rules, each rejected row keeping a reason code (table above).
Kept fixes were projected per animal to a planar frame in metres centred on its first fix; step
lengths and headings are geodesic on the WGS84 ellipsoid (Karney 2013), and turning angles are
the change of heading between consecutive steps (positive = clockwise, a right turn).</p>
<p>Step lengths were fitted by maximum likelihood with {_and([f.prose for f in FAMILIES.values()])}
families, and power-law and truncated power-law tails above a lower bound chosen by the
Kolmogorov–Smirnov criterion, compared with the likelihood-ratio test of Vuong as set out by
Clauset, Shalizi &amp; Newman (2009); turning angles with {_and([f.prose for f in TURN_FAMILIES.values()])}
families. Models were ranked by AIC within each comparison set.</p>
<p>Each animal's net displacement and its whole net-squared-displacement (NSD) curve were compared
with null walks built from its own fitted statistics: {null_text}. Monte Carlo p-values, pointwise
envelopes and a global extreme-rank envelope test (Myllymäki et al. 2017) give the evidence; q-values
control the false discovery rate across the animals of the run for each null model (Benjamini &amp;
Hochberg 1995).</p>
<p>Residency patterns were classified by fitting the NSD-through-time models of Bunnefeld et al.
(2011) and ranking them by AIC. First home-range estimates are
{_and([m.prose for m in RANGE_METHODS.values()])}, with the area–sample-size curve (Harris et al. 1990)
and Schoener's ratio as an autocorrelation diagnostic (Swihart &amp; Slade 1985); areas from fewer than 30 fixes
are reported as insufficient (Seaman et al. 1999). Fix-rate and
positional-error considerations follow Bjørneraas et al. (2010); path tortuosity measures follow
Benhamou (2004).</p>
"""


def _and(items: list[str]) -> str:
    """"a", "a and b", "a, b and c"."""
    return " and ".join([", ".join(items[:-1]), items[-1]]) if len(items) > 1 else "".join(items)


REFERENCES = [
    "Benhamou, S. (2004). How to reliably estimate the tortuosity of an animal's path: straightness, "
    "sinuosity, or fractal dimension? Journal of Theoretical Biology 229: 209–220.",
    "Benjamini, Y. &amp; Hochberg, Y. (1995). Controlling the false discovery rate: a practical and powerful "
    "approach to multiple testing. Journal of the Royal Statistical Society B 57: 289–300.",
    "Bjørneraas, K., Van Moorter, B., Rolandsen, C. M. &amp; Herfindal, I. (2010). Screening Global Positioning "
    "System location data for errors using animal movement characteristics. Journal of Wildlife Management 74: 1361–1366.",
    "Bunnefeld, N., Börger, L., van Moorter, B., Rolandsen, C. M., Dettki, H., Solberg, E. J. &amp; Ericsson, G. "
    "(2011). A model-driven approach to quantify migration patterns: individual, regional and yearly differences. "
    "Journal of Animal Ecology 80: 466–476.",
    "Clauset, A., Shalizi, C. R. &amp; Newman, M. E. J. (2009). Power-law distributions in empirical data. "
    "SIAM Review 51: 661–703.",
    "Harris, S., Cresswell, W. J., Forde, P. G., Trewhella, W. J., Woollard, T. &amp; Wray, S. (1990). "
    "Home-range analysis using radio-tracking data: a review of problems and techniques particularly as applied "
    "to the study of mammals. Mammal Review 20: 97–123.",
    "Kareiva, P. M. &amp; Shigesada, N. (1983). Analyzing insect movement as a correlated random walk. "
    "Oecologia 56: 234–238.",
    "Karney, C. F. F. (2013). Algorithms for geodesics. Journal of Geodesy 87: 43–55.",
    "Mohr, C. O. (1947). Table of equivalent populations of North American small mammals. "
    "American Midland Naturalist 37: 223–249.",
    "Myllymäki, M., Mrkvička, T., Grabarnik, P., Seijo, H. &amp; Hahn, U. (2017). Global envelope tests for "
    "spatial processes. Journal of the Royal Statistical Society B 79: 381–404.",
    "Seaman, D. E., Millspaugh, J. J., Kernohan, B. J., Brundige, G. C., Raedeke, K. J. &amp; Gitzen, R. A. "
    "(1999). Effects of sample size on kernel home range estimates. Journal of Wildlife Management 63: 739–747.",
    "Swihart, R. K. &amp; Slade, N. A. (1985). Testing for independence of observations in animal movements. "
    "Ecology 66: 1176–1184.",
    "Turchin, P. (1998). Quantitative Analysis of Movement: Measuring and Modeling Population Redistribution "
    "in Animals and Plants. Sinauer, Sunderland MA.",
    "Viswanathan, G. M., Buldyrev, S. V., Havlin, S., da Luz, M. G. E., Raposo, E. P. &amp; Stanley, H. E. "
    "(1999). Optimizing the success of random searches. Nature 401: 911–914.",
    "Worton, B. J. (1989). Kernel methods for estimating the utilization distribution in home-range studies. "
    "Ecology 70: 164–168.",
]

CAUTIONS = """
<div class="caution"><p><strong>Statistical verdicts support, and never replace, the judgement of
biologists who know the species, the study area and the collars.</strong> A verdict of
<em>farther</em> or <em>closer</em> says the animal is unusual under that null model only.</p></div>
<ul>
<li><strong>Model assumptions.</strong> The null walks assume independent, stationary steps and
turns. Behavioural switching (resting, foraging, travelling), seasonal change or a change of fix
schedule can make a track look more or less diffusive than any single random walk. Gaps are walked
by the model at the nominal fix interval. Just above the minimum track length power is low:
<em>consistent</em> is not evidence of random movement. Heavy tails can come from mixtures of
behaviours or individuals, not only from a Lévy walk.</li>
<li><strong>Multiple testing.</strong> q-values control the false discovery rate within this run;
re-running many settings and reporting the one that “works” defeats that control.</li>
<li><strong>Autocorrelation.</strong> Kernel density estimators assume independent fixes; frequent,
autocorrelated fixes bias kernel areas low. Treat MCP and KDE areas as seeds of a home-range study,
and an area–sample-size curve that has not levelled off as a sign the area is underestimated.</li>
<li><strong>Fix-rate bias and habitat-driven GPS error.</strong> Collars miss fixes more often under
dense canopy, in steep terrain and in dens or burrows; missing fixes are not random, so habitat use
and range shape inherit the bias. Positional error grows with DOP and fewer satellites; screening
thresholds are choices, recorded in manifest.json.</li>
<li><strong>Projection.</strong> Step lengths and angles are geodesic. Planar coordinates are exact in
distance from each animal's first fix and distorted slightly farther away (more for animals that
travel thousands of kilometres); areas are computed in an equal-area frame.</li>
<li><strong>Sensitive locations.</strong> Exact locations of sensitive species (nests, dens, roosts,
leks, animals of commercial value) can enable poaching, persecution and disturbance. Share reports,
tables and GeoJSON outside your team only with <code>--mask-locations</code>, and remember that a
track's shape can still identify a place to someone who knows the area.</li>
<li><strong>Permits and local rules.</strong> Defer to your permits, data-sharing agreements, animal-ethics
approval, national and local regulations and licensed veterinary and wildlife-management practice.
A statistical verdict is never on its own a reason to intervene with an animal.</li>
</ul>
"""

MASKED_NOTE = ("Locations are masked: maps show coordinates relative to a hidden origin, and the "
               "projection of each animal (which would reveal where it was) is not shown.")

UNMASKED_NOTE = ("Locations are NOT masked: maps are in metres from each animal's first fix and the "
                 "projections below reveal where the animals were. Run with --mask-locations before "
                 "sharing this report outside your team if the species or site is sensitive.")


def legend_html(nulls, optional=()) -> str:
    """The overview's legend: every term of the table, with the run's null models from the registry."""
    from roamstat.registry import NULLS

    terms = [
        ("tracked", "days from the first to the last kept fix, and the number of kept fixes."),
        ("end distance vs null", "how far the animal ended from its start (net displacement), as a multiple "
         "of the median end distance of its null walks. The bar is the null walks' 95 % range, the tick their "
         "median and the dot the animal (log scale from 1/20 to 20 times the median; red beyond the range, "
         "green below it)."),
        ("verdict per null", "<em>farther</em> / <em>closer</em>: the animal ended farther from / closer to its "
         "start than that null walk explains (Benjamini–Hochberg q below the run's alpha); <em>consistent</em>: "
         "no evidence either way (not proof of random movement); <em>insufficient</em>: too little data."),
    ]
    terms += [(name, NULLS[name].summary) for name in nulls if name in NULLS]
    terms += [
        ("q", "the p-value adjusted for testing many animals (false discovery rate; Benjamini &amp; Hochberg 1995)."),
        ("residency", "the net-squared-displacement pattern through time with the best AIC (Bunnefeld et al. 2011): "
         "<em>sedentary</em>, <em>resident</em> (settles in a range), <em>disperser</em> (leaves for good), "
         "<em>migrant</em> (leaves and returns), <em>nomad</em> (keeps drifting); <em>insufficient</em> names "
         "the fixes needed."),
        ("range-study candidate", "resident or sedentary and not farther than the unbounded random walk: worth a "
         "home-range study; the reason follows."),
        ("preferred area", "the 95 % kernel home range to cite: the autocorrelation-aware estimate when it was "
         "computed, else the reference-bandwidth KDE (Worton 1989), with its interval when given; "
         "<em>insufficient</em> below the fixes a kernel estimate needs; <em>none</em> when the best continuous-time "
         "model is not range-resident (no stationary home range to cite)."),
    ]
    if "movement model" in optional:
        terms.append(("movement model", "the continuous-time movement model with the best AICc for this animal."))
    if "time in state" in optional:
        terms.append(("time in state", "long-run share of time in each behavioural state of the best hidden "
                      "Markov model (state 1 has the shortest steps)."))
    rows = "".join(f"<dt>{t}</dt><dd>{d}</dd>" for t, d in terms)
    return f'<h3 id="legend">Legend</h3><dl class="legend">{rows}</dl>'
