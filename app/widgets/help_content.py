"""What each number in the kinetics and temperature-series views means.

Every topic gives a definition, the formula in plain notation, the assumptions behind it,
and its published sources. A citation that could not be checked against the paper is
marked "(from memory)", as in the project's reference notes. The cautions for hot-stage
work are general; each laboratory's own safety rules come first.
"""

from __future__ import annotations

from dataclasses import dataclass

from analysis.results import COUNTS
from analysis.spherulites.growth import INTERPOLATION_FRACTION, REGISTRATION_PX

_AVRAMI_PAPERS = (
    "M. Avrami, J. Chem. Phys. 7, 1103 (1939); 8, 212 (1940); 9, 177 (1941) (from memory)",
    "W.A. Johnson and R.F. Mehl, Trans. AIME 135, 416 (1939) (from memory)",
    "A.N. Kolmogorov, Izv. Akad. Nauk SSSR, Ser. Mat. 1, 355 (1937) (from memory)",
)
_DSC_GUIDE = ("A.T. Lorenzo, M.L. Arnal, J. Albuquerque and A.J. Müller, Polymer Testing 26, "
              "222-231 (2007) (from memory)")
_LH_PAPERS = (
    "J.I. Lauritzen and J.D. Hoffman, J. Res. Natl. Bur. Stand. 64A, 73 (1960) (from memory)",
    "J.D. Hoffman, G.T. Davis and J.I. Lauritzen, Treatise on Solid State Chemistry, Vol. 3, "
    "ch. 7, Plenum (1976) (from memory)",
    "J.D. Hoffman, Polymer 24, 3 (1983) (from memory)",
)
_FILM_REVIEW = ("E. Piorkowska, A. Galeski and J.-M. Haudin, Prog. Polym. Sci. 31, 549 (2006) "
                "(journal and year confirmed; volume and page from memory)")


@dataclass(frozen=True)
class HelpTopic:
    key: str
    title: str
    definition: str
    formula: str
    assumptions: str
    sources: tuple[str, ...]


TOPICS: tuple[HelpTopic, ...] = (
    HelpTopic(
        "growth_rate", "Growth rate G (µm/min)",
        "The speed at which a spherulite's radius advances into the melt at the crystallization "
        "temperature Tc. Each spherulite's radius is measured along directions where its front is "
        "still free (not touching a neighbour, not outside the field); the experiment's G pools the "
        "spherulites whose fit is good, with a 95 % confidence interval.",
        "R(t) = G · (t − tᵢ)   (tᵢ: the spherulite's own start time)",
        "Isothermal growth at constant rate; only fronts before impingement count. Curvature in R(t) "
        "points to a temperature that was not yet steady, to impurity rejection, or to impingement.",
        _LH_PAPERS[1:2] + (_FILM_REVIEW,),
    ),
    HelpTopic(
        "ramp_growth", "Growth rate over a temperature range (ramp or step run)",
        "While the stage cools, heats or steps through holds, every front advances at the rate of "
        "the film's current temperature. One joint fit of all spherulites' radii gives G(T) as a "
        "smooth curve (a penalised spline of ln G in T) with a 95 % band (it allows for errors a "
        "frame's radii share and for the choice of smoothing), Kg and G0 fitted directly to all "
        "radii, and nuclei counted against the temperature of their birth. Choose the kind and the "
        "stage log or typed programme in Edit → Experiment kind and temperature….",
        "R(t) = ∫ G(T(t')) dt' from the birth;   film: τ·dT_film/dt = T_sensor − T_film",
        "The log's clock offset and the film's lag behind the stage sensor must be right: at "
        "10 K/min a 1 s error shifts T by 0.17 K, several per cent of G where G is steep. Only "
        "fronts before impingement count; radii below 4 px are not used. Neighbouring "
        "temperatures of the curve are not independent points.",
        _LH_PAPERS[:1] + ("P.H.C. Eilers and B.D. Marx, Statistical Science 11, 89 (1996) "
                          "(penalised splines)",),
    ),
    HelpTopic(
        "density_areal", "Nucleation density N_A (per mm²)",
        "Number of spherulite centres per unit area of the analysed field, counted by the centre "
        "position so that spherulites cut by the border are neither lost nor counted twice.",
        "N_A = (number of centres in the field) / (field area)",
        "Nuclei placed at random, so the count is Poisson: its relative uncertainty is 1/√(count); "
        "25 spherulites give about ±20 % (one standard deviation; the exact 95 % interval, about "
        "−35 % to +48 %, is shown).",
        _AVRAMI_PAPERS[:1],
    ),
    HelpTopic(
        "density_volumetric", "Volumetric density N_V (per mm³) and film thickness h",
        "Nuclei per unit volume, obtained from the areal density and the film thickness shown next to "
        "it. A transmission image counts nuclei through the whole thickness, so N_V = N_A / h is what a "
        "bulk (3-D) prediction needs.",
        "N_V = N_A / h",
        "No nuclei on the glass surfaces (they add a 2-D term), no nuclei hidden behind earlier "
        "spherulites, and a film thick enough that confinement does not change N or G. h enters N_V "
        "linearly: measure it rather than assume it.",
        (_FILM_REVIEW, "J.W. Cahn, time-cone method for transformation kinetics in finite "
         "domains, Mater. Res. Soc. Symp. Proc. 398, 425 (1996) (from memory)"),
    ),
    HelpTopic(
        "nucleation_rate", "Nucleation rate Ṅ (per mm² per min, per mm³ per min)",
        "Rate at which new nuclei appear per unit of untransformed melt. New nuclei can only appear "
        "in melt that is not yet crystalline, so the observed rate is divided by the untransformed "
        "fraction.",
        "Ṅ(t) = [dN_obs/dt] / [1 − X(t)]",
        "A constant rate over the time used; nuclei counted over the whole field.",
        _AVRAMI_PAPERS[:1],
    ),
    HelpTopic(
        "nucleation_mode", "Nucleation mode (athermal, thermal, mixed)",
        "Athermal (predetermined): all nuclei are active from the start, so the count stops rising "
        "after the first minutes. Thermal (sporadic): nuclei keep appearing at a steady rate. Mixed: "
        "both. The mode found by the analysis can be overridden when you know better (for example a "
        "nucleating agent).",
        "athermal: N constant;  thermal: N grows ∝ t;  mixed: N = N₀ + Ṅ·t",
        "The analysis decides from how the number of nuclei per unit of untransformed area grows "
        "with time; the criterion it used is shown as the tooltip of the mode in the kinetics view.",
        _AVRAMI_PAPERS[:1],
    ),
    HelpTopic(
        "density_used", "Nuclei present at the start N₀ (the density in the prediction)",
        "The density of predetermined nuclei that enters the predicted Avrami kinetics. Athermal: "
        "every nucleus counted in the field. Mixed: only the initial burst, the nuclei born within a "
        "few frame intervals of the first; the later ones are described by the nucleation rate Ṅ, "
        "so counting them in N₀ as well would count them twice. Thermal: none, the rate alone.",
        "athermal: N₀ = N_A (film) or N_A / h (bulk);  mixed: N₀ = burst count / field area "
        "(per mm², or per mm³ after / h);  thermal: N₀ = 0",
        "The burst is the densest group of births at the start of the record; with one or two "
        "frame intervals between nuclei the split between burst and later births is uncertain.",
        _AVRAMI_PAPERS[:2],
    ),
    HelpTopic(
        "avrami", "Avrami equation, exponent n and rate constant k",
        "The fraction transformed X(t) for nuclei scattered at random that grow until they meet. "
        "n reflects the dimension of growth and the nucleation mode; k collects nucleation and growth. "
        "k is reported in min⁻ⁿ with n stated; k values with different n cannot be compared directly "
        "(compare k^(1/n) or 1/t½).",
        "X(t) = 1 − exp(−k·tⁿ);  ln(−ln(1 − X)) = ln k + n·ln t;  k[s⁻ⁿ] = k[min⁻ⁿ] / 60ⁿ",
        "Random (Poisson) nuclei, constant G, growth stopped only where neighbours touch. Originally n "
        "is an integer 1-4; fitted values are customarily treated as non-integer.",
        _AVRAMI_PAPERS + ("IUPAC Compendium of Chemical Terminology (Gold Book), entry "
                          "'Avrami equation' (online edition, IUPAC 2019)",),
    ),
    HelpTopic(
        "predicted_k", "Predicted n and k from N and G",
        "From the extended-volume integral: each nucleus grows as a sphere (bulk) or disc (film) of "
        "radius G·(t − τ); the sum of all such shapes, overlaps included, gives the extended fraction "
        "and X = 1 − exp(−X_ex). The projected area of a film image always follows the 2-D law; the "
        "bulk prediction uses N_V = N_A / h.",
        "bulk, athermal: k = (4π/3)·N_V·G³, n = 3;   bulk, thermal: k = (π/3)·Ṅ_V·G³, n = 4;\n"
        "film, athermal: k = π·N_A·G², n = 2;   film, thermal: k = (π/3)·Ṅ_A·G², n = 3;\n"
        "mixed: X_ex = k_athermal·t^d + k_thermal·t^(d+1) (not one power law; n is the local slope "
        "at t½)",
        "Constant G and constant Ṅ from the start of the isotherm; all nuclei in the counted volume.",
        _AVRAMI_PAPERS,
    ),
    HelpTopic(
        "half_time", "Half-time t½ (min)",
        "Time to reach half of the final crystallinity. Read directly from X(t) = 0.5 or computed from "
        "a fitted n and k; comparing the two checks the fit. The half-time is the best single number "
        "to compare microscopy with calorimetry because n and k are strongly correlated.",
        "t½ = (ln 2 / k)^(1/n)",
        "Times counted from the induction time (calorimetry) or from the isothermal start "
        "(microscopy).",
        _AVRAMI_PAPERS[:1] + (_DSC_GUIDE,),
    ),
    HelpTopic(
        "calorimetry_conversion", "Relative crystallinity X(t) from a calorimetry isotherm",
        "The exotherm is integrated above its baseline; the running integral divided by the total "
        "gives the mass-fraction crystallinity relative to its final value. The baseline runs "
        "between the steady signal before the exotherm and the flat signal after it; both limits "
        "can be dragged on the heat-flow plot.",
        "X(t) = ∫ from t₀ to t of (dH/dt − baseline) dt  /  ∫ from t₀ to t_end of (dH/dt − baseline) dt",
        "Heat flow proportional to the crystallization rate; no crystallization during the cooling "
        "to Tc; the start-up transient of the instrument is excluded.",
        (_DSC_GUIDE, "S. Vyazovkin and N. Sbirrazzuoli, Processes 11, 1438 (2023)"),
    ),
    HelpTopic(
        "induction_time", "Induction time t₀ (min)",
        "The start of the exotherm after the instrument has settled at Tc. The Avrami plot uses "
        "t − t₀; its low-conversion end is very sensitive to t₀.",
        "t → t − t₀ in every Avrami formula",
        "Nucleation and growth start together at t₀.",
        (_DSC_GUIDE,),
    ),
    HelpTopic(
        "fit_window", "Avrami fit window, n, k, t½ and R²",
        "The straight-line fit of ln(−ln(1 − X)) against ln(t − t₀) is made only inside the shaded "
        "conversion window, by default 3-20 %, so that secondary crystallization at late times does "
        "not bend the line. R² measures how straight the data are inside the window; n outside about "
        "2-4.5 from a bulk sample usually signals a wrong t₀, crystallization during cooling, or a "
        "window that reaches the secondary stage.",
        "slope = n;  intercept = ln k;  t½(fit) = (ln 2 / k)^(1/n)",
        "Primary crystallization only; the guideline window is a common practice, not a law.",
        (_DSC_GUIDE,),
    ),
    HelpTopic(
        "enthalpy", "Enthalpy ΔH (J/g) and crystallinity",
        "The total area of the exotherm divided by the sample mass. Divided by the enthalpy of a "
        "perfect crystal ΔH0 of the chosen material it gives the mass-fraction crystallinity.",
        "w_c = ΔH / ΔH0",
        "A pure polymer (divide by its weight fraction in a blend or composite); ΔH0 values differ "
        "between sources, see the material table for the one used.",
        (_DSC_GUIDE, "B. Wunderlich, Macromolecular Physics, Vol. 3, Academic Press (1980) (from memory)"),
    ),
    HelpTopic(
        "volume_mass", "Volume and mass fractions",
        "Microscopy sees a volume (area) fraction; calorimetry integrates a mass fraction. Before the "
        "two X(t) curves are overlaid, the calorimetry curve is converted with the crystal and "
        "amorphous densities of the material.",
        "φ = w / (w + (ρc/ρa)·(1 − w))",
        "Crystallinity inside the spherulites constant in time. The effect on n is small and on k "
        "a few per cent.",
        (_DSC_GUIDE,),
    ),
    HelpTopic(
        "comparison", "Microscopy against calorimetry",
        "The bulk prediction from N_V and G is set beside the calorimetry fit, with the ratio of each "
        "pair. Agreement within the combined uncertainty needs the same Tc and melt history, a true "
        "volume density (surface nuclei accounted for), and a calorimetry n near 3 or 4. Differences "
        "of a factor 2-5 are common (from memory) and usually trace to different nucleation densities in a thin "
        "film and a bulk pan, or to secondary crystallization.",
        "ratio = microscopy value / calorimetry value (t½ is the most robust to compare)",
        "See the assumptions of N_V = N_A / h and of the calorimetry conversion.",
        (_FILM_REVIEW, _DSC_GUIDE),
    ),
    HelpTopic(
        "lauritzen_hoffman", "Lauritzen-Hoffman growth equation",
        "Secondary-nucleation theory of the growth rate: a transport term that slows growth near the "
        "glass transition and a nucleation term that slows it near the melting point.",
        "G = G0 · exp(−U* / (R·(Tc − T∞))) · exp(−Kg / (Tc·ΔT·f)),  ΔT = Tm0 − Tc,  "
        "f = 2·Tc / (Tm0 + Tc)  (temperatures in K)",
        "Growth measured isothermally before impingement; Tc between T∞ and Tm0.",
        _LH_PAPERS,
    ),
    HelpTopic(
        "transport_constants", "U* and T∞",
        "U* is the activation energy of chain transport to the growth front, T∞ the temperature "
        "where that transport stops. Two published sets are in use; always report which one.",
        "universal set: U* = 1500 cal/mol (≈ 6270 J/mol), T∞ = Tg − 30 K;   "
        "WLF set: U* = 4120 cal/mol (17 238 J/mol), T∞ = Tg − 51.6 K",
        "Changing the set changes the fitted Kg by a few to tens of per cent, most near Tg.",
        ("K. Suzuki and A.J. Kovacs, Polym. J. 1, 82 (1970) (from memory)", _LH_PAPERS[2],
         "M.L. Williams, R.F. Landel and J.D. Ferry, J. Am. Chem. Soc. 77, 3701 (1955) "
         "(from memory)"),
    ),
    HelpTopic(
        "kg", "Nucleation constant Kg (K²) and the linearised plot",
        "Plotting y = ln G + U*/(R·(Tc − T∞)) against x = 1/(Tc·ΔT·f) gives a straight line of slope "
        "−Kg and intercept ln G0 for one regime. Kg is fitted with a 95 % confidence interval, weighted "
        "by the growth-rate uncertainties.",
        "Kg = nᵣ·b0·σ·σe·Tm0 / (Δh_f·k_B),  nᵣ = 4 (regimes I and III), 2 (regime II)",
        "Kg depends strongly on the Tm0 used (a few kelvin change it by tens of per cent): always "
        "state Tm0, Tg, U* and T∞ with it.",
        _LH_PAPERS,
    ),
    HelpTopic(
        "regimes", "Regimes I, II, III",
        "Regime I: one surface nucleus completes a layer; regime II: many nuclei per layer; regime "
        "III: nuclei about one stem apart. The linearised plot then bends, and the slope ratio at a "
        "transition should be near 2. Shaded bands mark the regimes the two-segment fit supports.",
        "Kg(I) = Kg(III) = 2·Kg(II)",
        "A break is reported only when the data support it better than a single line "
        "(information criterion). Measured ratios are often near, not exactly, 2: poly(L-lactide) "
        "gave 2.17.",
        _LH_PAPERS[2:] + ("Zhou et al., Polym.-Plast. Technol. Eng. (2007) (poly(L-lactide) "
                          "regime III/II ratio)",),
    ),
    HelpTopic(
        "sigma_sigma_e", "σσe and the fold-surface free energy σe",
        "The product of the lateral and fold surface free energies follows from Kg with the stem "
        "thickness b0 and the heat of fusion per unit volume Δh_f of the chosen material. σ alone is "
        "estimated by the Thomas-Stavely relation, which then gives σe.",
        "σσe = Kg·Δh_f·k_B / (nᵣ·b0·Tm0);   σ = α·Δh_f·√(a0·b0), α ≈ 0.1;   Δh_f = ΔH0·ρc",
        "α is not universal (0.1 for polyethylene-like chains; other values have been argued).",
        _LH_PAPERS[1:2] + ("R.B. Thomas and L.A.K. Stavely, J. Chem. Soc. 4569 (1952) "
                           "(from memory)",),
    ),
    HelpTopic(
        "intervals", "95 % intervals: what each one includes",
        "Every number is written as value (95 % CI low–high) unit. Pooled G: the scatter between "
        "spherulites (random effects) and, added in quadrature, the timing error every spherulite "
        "of the recording shares: irregular frame times, the residual of the sub-frame "
        f"interpolation of arrival times ({100 * INTERPOLATION_FRACTION:.3g} % of a frame interval over "
        f"the growth span) and the residual of the drift registration ({REGISTRATION_PX:g} px over the "
        "span, when drift was found); the "
        "per-spherulite fits alone would claim far less. N_A, N_V and the nucleation rate: exact "
        "Poisson intervals on the counts. Predicted n, k, t½ and the calorimetry/microscopy "
        "ratio: a bootstrap over spherulites and over nuclei (Poisson counts), 1000 draws with "
        "the seed stored in the outputs (series settings, resampling_seed); on the Kinetics and "
        "Tc-series pages the resampled intervals are computed in the background with a "
        "progress bar and Cancel. Calorimetry n, k, t½: each analysis choice "
        "varied on its own (lag corrections of 4 s and 8 s, a later baseline end, four fit "
        "windows, three onset-fit ranges) counts as a rectangular distribution about the middle "
        "of its range, combined in quadrature with the noise (the record re-analysed with its "
        "own noise level added) and the induction-time error. Kg, G0, σσe, σe and the regime "
        "break: a bootstrap that moves each G by its error and each temperature by the stage "
        "uncertainty (basic interval, which undoes the flattening of Kg by temperature errors).",
        "half-width = √(statistical² + shared²);  N_A interval = Garwood limits / area;  "
        "bootstrap interval = 2.5 and 97.5 percentiles of the draws;  a choice spanning a..b: "
        "centre (a+b)/2, u = (b−a)/(2√3)",
        "Stage-temperature uncertainty: ±0.5 K by default (common practice for a calibrated hot "
        "stage), set for the project on the Tc-series page (Lauritzen-Hoffman constants) or "
        "for one experiment in its Properties (empty: the project's value); it widens G(Tc) by "
        "1.96·|d ln G/dT|·G·u_T in the tables and weights the Lauritzen-Hoffman fit. The shared "
        "timing constants were set on simulated recordings (README, Uncertainty); a real clock or "
        "stage may be worse. Only the errors named here are included.",
        ("R. DerSimonian and N. Laird, Control. Clin. Trials 7, 177 (1986)",
         "F. Garwood, Biometrika 28, 437 (1936); K. Ulm, Am. J. Epidemiol. 131, 373 (1990)",
         "B. Efron and R.J. Tibshirani, An Introduction to the Bootstrap, Chapman & Hall (1993)",
         "JCGM 100:2008, Guide to the expression of uncertainty in measurement"),
    ),
    HelpTopic(
        "hoffman_weeks", "Equilibrium melting point Tm0 (Hoffman-Weeks)",
        "Melting points Tm of samples crystallized at several Tc fall on a line; where it crosses "
        "Tm = Tc is the estimate of Tm0. The slope is the inverse of the lamellar thickening ratio γ.",
        "Tm = Tm0·(1 − 1/γ) + Tc/γ;  fit Tm = a + b·Tc;  Tm0 = a / (1 − b);  γ = 1/b",
        "Caveat: the linear extrapolation tends to underestimate Tm0; reorganisation during the "
        "heating scan and multiple melting peaks distort Tm. Use a fixed, moderate heating rate. "
        "A slope b outside 0-1 cannot be extrapolated.",
        ("J.D. Hoffman and J.J. Weeks, J. Res. Natl. Bur. Stand. 66A, 13 (1962) (from memory)",
         "H. Marand, J. Xu and S. Srinivas, Macromolecules 31, 8219 (1998) (authors from memory)"),
    ),
)

CAUTIONS_TITLE = "Working safely at the hot stage"
CAUTIONS: tuple[str, ...] = (
    "Your laboratory's own safety rules and the instrument manuals come first; these notes only "
    "remind you of the usual hazards.",
    "Hot parts burn. The stage, its lid, the sample holder and freshly pressed slides stay hot for "
    "minutes after a run. Handle them with tweezers or tongs and heat-resistant gloves, and put them "
    "down to cool on a marked heat-proof place.",
    "Overheated polymers give off fumes. Keep the melt below the polymer's degradation onset (check it "
    "by thermogravimetry or in the literature) and keep melt times short. Fluorinated and "
    "halogen-containing polymers can release corrosive or toxic products. Work under local exhaust, "
    "purge the stage with dry nitrogen where it allows, and never heat an unknown sample or additive "
    "before you know how it decomposes.",
    "Liquid-nitrogen cooling can cause cold burns and, in a small room, lack of oxygen: wear face "
    "protection when filling and keep the room ventilated. Check the hoses of water-cooled stages "
    "before heating.",
    "Illuminators are bright: do not look along the light path without the optics in place, and use "
    "the lowest intensity that gives usable images. Laser or UV accessories need the eye protection "
    "their class requires.",
    "Hot or pressed cover slips break easily: discard them in a sharps container. Keep leads and "
    "controllers away from spills, set an over-temperature limit, and do not leave a heating "
    "programme unattended.",
    "Dry solvent-cast films fully before melting them: residual solvent is flammable and its bubbles "
    "spoil growth-rate measurements.",
    "Ramp and step programmes drive the stage on their own: check the programme's end and limit "
    "temperatures before starting it, and stay with the stage until it is back at a safe "
    "temperature.",
)


_COUNT_NOTES = {
    "spherulites_detected": (
        "number of spherulites in the result's list",
        "Includes spherulites cut by the border, ones with too few radius points and ones you "
        "excluded; they are shown so that you can check them, not all of them enter N or G."),
    "nuclei_counted": (
        "N_A = nuclei counted / field area",
        "Counting by the centre position means spherulites cut by the border are neither lost nor "
        "counted twice; the count is Poisson, so its relative uncertainty is 1/√(count)."),
    "spherulites_in_pooled_g": (
        "G = weighted mean of the single-spherulite growth rates",
        "Spherulites that impinge at once, leave the field or whose radius does not grow linearly "
        "are left out, so this count is usually smaller than the number detected."),
}

#: One topic per count of ``analysis.results.COUNTS``, under the same key and label.
TOPICS += tuple(
    HelpTopic(key, label, f"{label}: {what}.", _COUNT_NOTES[key][0], _COUNT_NOTES[key][1],
              (_FILM_REVIEW,))
    for key, (label, what) in COUNTS.items())


def topic(key: str) -> HelpTopic:
    for entry in TOPICS:
        if entry.key == key:
            return entry
    raise KeyError(key)
