"""Stage 4: experimental variograms and the variogram model of each domain and grade
(given in the project file, or fitted after finding the orientation of continuity)."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
import pandas as pd

from blockmodel.config.project import Project
from blockmodel.errors import setting_error
from blockmodel.estimation.orientation import Orientation
from blockmodel.variography.directions import OrientationFit, find_orientation
from blockmodel.variography.experimental import (
    ExperimentalVariogram,
    NormalScores,
    experimental_variogram,
    experimental_variograms,
    normal_scores,
    scan_directions,
)
from blockmodel.variography.fitting import (
    MIN_PAIRS,
    FittedModel,
    fit_variogram_checked,
    principal_directions,
)
from blockmodel.variography.models import Structure, VariogramModel

__all__ = [
    "Variography",
    "domain_variography",
    "normal_score_model",
    "scaled_model",
    "variography",
]


@dataclass(frozen=True)
class Variography:
    """One domain and grade: experimental variograms, the model and where it came from.

    ``scale`` converts the experimental values to the model's units: 1 for the
    semivariogram of grades; the (declustered) variance for a correlogram or normal-score
    variogram; the squared mean for the pairwise relative variogram.
    """

    domain: str
    grade: str
    orientation: Orientation
    directional: tuple[ExperimentalVariogram, ...]
    downhole: ExperimentalVariogram
    model: VariogramModel
    source: str  # "fitted" or "project file"
    scale: float = 1.0
    scores: NormalScores | None = None
    scan: dict | None = None
    orientation_fit: OrientationFit | None = None  # when the orientation was found from data
    fit: FittedModel | None = None  # when the model was fitted
    downhole_direction: np.ndarray | None = None  # (3,) mean direction of the holes

    def warnings(self) -> list[str]:
        """What a reader must know about how far to trust this model."""
        out = []
        key = f"{self.domain}.{self.grade}"
        if self.fit is not None:
            for label, r2 in self.fit.poor().items():
                out.append(
                    f"{key}: the fitted model follows the {label} variogram poorly "
                    f"(weighted R² {r2:.2f}); review it, or give the model in "
                    f"[variogram.{key}]"
                )
            if self.fit.lags_dropped:
                out.append(
                    f"{key}: {self.fit.lags_dropped} lag(s) with fewer than {MIN_PAIRS} pairs "
                    "were left out of the fit"
                )
        o = self.orientation_fit
        if o is not None and o.loose_axes():
            out.append(
                f"{key}: the data do not place the {' and '.join(o.loose_axes())} axis "
                f"({o.describe()}); give variography.orientation if the geology says more"
            )
        return out


def _mean_hole_direction(composites: pd.DataFrame) -> np.ndarray | None:
    """Mean unit direction (3,) of the holes, from successive composites of each hole
    (sign-aligned, so up and down count alike); None when no hole has two composites."""
    table = composites.sort_values(["hole", "from"], kind="stable")
    xyz = table[["x", "y", "z"]].to_numpy(float)
    same = table["hole"].to_numpy()[1:] == table["hole"].to_numpy()[:-1]
    steps = (xyz[1:] - xyz[:-1])[same]
    length = np.linalg.norm(steps, axis=1)
    steps = steps[length > 0] / length[length > 0, None]
    if len(steps) == 0:
        return None
    steps[steps[:, 2] > 0] *= -1.0
    mean = steps.mean(axis=0)
    return mean / np.linalg.norm(mean)


def _model_from_spec(spec) -> VariogramModel:
    return VariogramModel(
        spec.nugget,
        [Structure(s.kind, s.sill, s.ranges, Orientation(*s.orientation)) for s in spec.structures],
    )


def scaled_model(model: VariogramModel, factor: float) -> VariogramModel:
    """``model`` with its nugget and sills multiplied by ``factor`` (ranges unchanged)."""
    return VariogramModel(
        model.nugget * factor,
        [Structure(s.kind, s.sill * factor, s.ranges, s.orientation) for s in model.structures],
    )


def variography(
    project: Project, table: pd.DataFrame, weights: np.ndarray
) -> dict[str, Variography]:
    """Experimental variograms along the principal axes, downhole and over a fan of
    directions, and the fitted (or given) model, per estimated domain and grade.

    Parameters
    ----------
    project : Project
    table : DataFrame
        The composites (not changed).
    weights : (n,) float64
        Declustering weight of each composite, in the table's order.
    """
    out = {}
    for d in project.domains:
        if not d.estimate:
            continue
        in_domain = (table["domain"] == d.name).to_numpy()
        for g in project.grades:
            ok = in_domain & table[g].notna().to_numpy()
            out[f"{d.name}.{g}"] = domain_variography(project, d.name, g, table[ok], weights[ok])
    return out


def domain_variography(
    project: Project,
    domain: str,
    grade: str,
    sub: pd.DataFrame,
    decl: np.ndarray,
    *,
    scan: bool = True,
) -> Variography:
    """Variography of one domain and grade from its composites ``sub`` (grade present)
    and their declustering weights; ``scan=False`` leaves out the fan of directions (a
    figure only)."""
    v = project.variography
    key = f"{domain}.{grade}"
    pts = sub[["x", "y", "z"]].to_numpy(float)
    grades = sub[grade].to_numpy(float)
    given = key in project.variogram
    if not given and (len(grades) < 2 or np.ptp(grades) == 0):
        shown = f" ({grades[0]:g})" if len(grades) else ""
        raise setting_error(
            project.data.samples,
            grade,
            f"{key}: {len(grades)} composite(s), all grades "
            f"equal{shown}: no variogram can be fitted; give a model in [variogram.{key}]",
        )
    values, scores, scale = _values_and_scale(v, grades, decl)
    orientation_fit = None
    if given:
        model = _model_from_spec(project.variogram[key])
        orient = model.orientation
    elif v.orientation is not None:
        model, orient = None, Orientation(*v.orientation)
    else:  # find the orientation of continuity in 3D
        try:
            orientation_fit = find_orientation(
                pts, values, lag=v.lag, n_lags=v.lags, kind=v.kinds[0]
            )
        except ValueError as exc:
            raise setting_error(
                project.source,
                "variography.orientation",
                f"cannot find the orientation of continuity for {key} ({exc}); give "
                f"variography.orientation or a model in [variogram.{key}]",
            ) from None
        model, orient = None, orientation_fit.orientation
    common = {"estimator": v.estimator, "weights": decl if v.use_declustering_weights else None}
    directional = _directional(v, pts, values, orient, common)
    # pairs down one hole; point samples (own support, no hole) take no part
    drilled = (sub["source"] == "drillhole").to_numpy() if "source" in sub else slice(None)
    downhole = experimental_variogram(
        pts[drilled],
        values[drilled],
        lag=project.compositing.length,
        n_lags=v.lags,
        holes=sub["hole"].to_numpy()[drilled],
        label="downhole",
        estimator=v.estimator,
        weights=None if common["weights"] is None else common["weights"][drilled],
    )
    fan = None
    if scan and len(values) > 1:
        fan = scan_directions(
            pts,
            values,
            np.arange(0.0, 180.0, 15.0),
            np.array([0.0, 30.0, 60.0]),
            lag=v.lag,
            n_lags=min(v.lags, 8),
            angular_tolerance=15.0,
            **common,
        )
    fit = None
    along = _mean_hole_direction(sub[drilled])
    if model is None:
        fitted_to = [(e, a) for a, e in enumerate(directional)]
        if along is not None:  # the short lags down the holes fix the nugget
            fitted_to.append((downhole, along))
        try:
            fit = fit_variogram_checked(
                fitted_to,
                v.kinds[: v.structures],
                orient,
                fixed=dict(v.fixed),
                extent=float(np.linalg.norm(np.ptp(pts, axis=0))),
            )
        except ValueError as exc:
            raise setting_error(
                project.source, "variography", f"cannot fit a variogram for {key}: {exc}"
            ) from None
        # standardised variograms: sills scaled to the declustered variance (common practice)
        model = scaled_model(fit.model, scale)
    return Variography(
        domain,
        grade,
        orient,
        tuple(directional),
        downhole,
        model,
        "fitted" if fit is not None else "project file",
        scale=scale,
        scores=scores,
        scan=fan,
        orientation_fit=orientation_fit,
        fit=fit,
        downhole_direction=along,
    )


def _values_and_scale(v, grades: np.ndarray, decl: np.ndarray):
    """The values the variograms are computed on (grades or their normal scores), the
    normal-score table (or None), and the factor taking the experimental values to grade
    units squared: the declustered variance for normal scores and the correlogram, the
    squared declustered mean for the pairwise relative variogram, else 1."""
    mean = float(decl @ grades / decl.sum()) if len(grades) else 0.0
    variance = float(decl @ (grades - mean) ** 2 / decl.sum()) if len(grades) else 0.0
    if v.transform == "normal_scores":
        values, scores = normal_scores(grades, decl)
        return values, scores, variance
    if v.estimator == "correlogram":
        return grades, None, variance
    if v.estimator == "pairwise_relative":
        return grades, None, mean * mean
    return grades, None, 1.0


def _directional(v, pts, values, orient: Orientation, common: dict) -> list:
    """Experimental variograms along the major, semi and minor axes of ``orient`` (the
    minor with its own lag; the major and semi from one search for pairs)."""
    axes = principal_directions(orient)
    out = []
    for lag, which in ((v.lag, (0, 1)), (v.minor_lag, (2,))):
        out += experimental_variograms(
            pts,
            values,
            [tuple(axes[a]) for a in which],
            lag=lag,
            n_lags=v.lags,
            lag_tolerance=None if v.lag_tolerance is None else v.lag_tolerance * (lag / v.lag),
            angular_tolerance=v.angular_tolerance,
            side_band=v.side_band,
            updown_band=v.updown_band,
            labels=[("major", "semi", "minor")[a] for a in which],
            **common,
        )
    return out


def normal_score_model(
    project: Project,
    composites: pd.DataFrame,
    weights: np.ndarray,
    grade: Variography,
    *,
    fit_ranges: bool = False,
) -> tuple[VariogramModel, str]:
    """The normal scores' variogram model (total sill 1) of the composites of one domain
    and grade (with their declustering weights), and where it came from: with
    ``simulation.model = "fit"``, the grade model's structure kinds, ranges and
    orientation with the nugget and sills fitted to the normal scores' experimental
    variograms along its axes; with ``"standardised"``, the grade model scaled to sill 1.
    A model given in ``[simulation.models]`` for this domain and grade takes precedence and
    is used as given.  ``fit_ranges`` (the bootstrap's refits) fits the ranges too, the
    grade model's structure kinds and its first structure's orientation kept."""
    given = project.simulation.models.get(f"{grade.domain}.{grade.grade}")
    if given is not None:
        return _model_from_spec(given), "given in the project file"
    m = grade.model
    if project.simulation.model == "standardised" or not m.structures:
        return scaled_model(m, 1.0 / m.total_sill), "the grade model's shape"
    o = m.structures[0].orientation
    ranges = {
        f"range{k + 1}_{axis}": r
        for k, st in enumerate(m.structures)
        for axis, r in zip(("major", "semi", "minor"), st.ranges, strict=True)
    }
    v = dataclasses.replace(
        project.variography,
        transform="normal_scores",
        estimator="semivariogram",
        orientation=(o.azimuth, o.plunge, o.tilt),
        structures=len(m.structures),
        kinds=tuple(st.kind for st in m.structures),
        fixed={} if fit_ranges else ranges,
    )
    scores_project = dataclasses.replace(project, variography=v, variogram={})
    fitted = domain_variography(
        scores_project, grade.domain, grade.grade, composites, weights, scan=False
    )
    model = fitted.fit.model
    if fit_ranges:
        return scaled_model(model, 1.0 / model.total_sill), "fitted to the normal scores"
    # the grade model's orientation per structure (the fit takes the first's for all); a
    # structure whose sill was fitted to zero is left out, so each is found by its ranges
    model = VariogramModel(
        model.nugget,
        [
            dataclasses.replace(
                st,
                orientation=next(
                    g.orientation
                    for g in m.structures
                    if g.kind == st.kind and np.allclose(g.ranges, st.ranges)
                ),
            )
            for st in model.structures
        ],
    )
    return scaled_model(
        model, 1.0 / model.total_sill
    ), "nugget and sills fitted to the normal scores"
