"""Charts of an evaluated plan: the altitude profile over the expected saturation.

No physics here: everything drawn is read from a :class:`altox.evaluation.evaluate.PlanResult` and from
the guidance rule sets (:func:`altox.guidance.load_rule_set`).  matplotlib is imported inside the
functions, only when a chart is asked for, and only through its object API with the Agg
canvas (no pyplot, no display, no global figure state).

The chart has two panels sharing the time axis:

* **altitude** -- an expedition's altitude through each day (thin line), its nights at the
  sleeping altitude (thick line) and the day's high points (open triangles); a flight's
  aircraft pressure altitude (thin solid) and cabin pressure altitude (thick dashed).  The
  guidance thresholds of the plan's rule sets are drawn as horizontal lines: cabin-altitude
  thresholds of aviation rule sets (dash-dot for oxygen, dense dots for limits) and the
  sleeping altitude above which expedition guidance applies (long dashes).
* **expected SaO2** at rest on air -- the reference adult (thick), each member (thin, faint)
  and the band between the members' lowest and highest values; dotted lines at the plan's
  saturation levels.

On both panels: legs where the plan does not meet a guidance rule are hatched ``///`` and
tagged with the report's flag (``breaks 1``...); rest days have a plain grey background; legs with
planned supplemental oxygen carry a cross-hatched strip along the foot of the altitude panel.
Every series differs by line style, width, marker or hatch as well as colour, so the chart
reads in greyscale.
"""

from __future__ import annotations

import io
import re
from pathlib import Path

from altox.present.render import FLAG_BROKEN
from altox.guidance.applied import applied_rule_sets  # noqa: E402,F401  (re-exported)

#: default figure size [in] and resolution [dots per inch] of ``altox plan --chart``
CHART_SIZE_IN = (10.0, 7.0)
CHART_DPI = 150
#: file formats by suffix
CHART_FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}
#: finding statuses that mean the plan does not meet the guidance
BROKEN_STATUSES = ("required-not-planned", "limit-exceeded")

# -- purely visual constants (altox's own palette; every pairing also differs in greyscale) --
_INK = "#1b2430"
_ALT = "#1f4e79"          # altitude / aircraft
_CABIN = "#b0531a"        # cabin altitude
_NIGHT = "#12263d"
_REF = "#111111"          # reference adult SaO2
_MEMBER = "#5d6b7a"
_BAND = "#a9bccf"
_BROKEN = "#9c2f2f"
_REST = "#e4e4e4"
_O2 = "#2f7d6d"
_GUIDE = "#6a3d8f"
_LEVEL = "#777777"
_FONT_PT = 9.0
_LABEL_PT = 7.5
_FT_PER_M = 1.0 / 0.3048
_RC = {
    "svg.fonttype": "none",        # text stays text in SVG: searchable, selectable, small
    "svg.hashsalt": "altox",       # stable element ids
    "pdf.fonttype": 42,
    "hatch.linewidth": 0.7,
    "font.size": _FONT_PT,
    "font.family": "sans-serif",
    "axes.titlesize": _FONT_PT,
    "axes.labelsize": _FONT_PT,
}


def _plain(text: str) -> str:
    """Text shown as written: matplotlib would read ``$...$`` as mathematics."""
    return str(text).replace("$", r"\$")




def threshold_lines(result, rule_sets) -> list[dict]:
    """Guidance thresholds to draw on the altitude panel, from the rule data.

    Aviation rule sets give cabin pressure altitudes (``Threshold.lower_ft``) and apply to
    flights; expedition rule sets give the sleeping altitude above which they apply
    (``Threshold.above_m``).  Thresholds at the same altitude are merged into one line.

    Returns
    -------
    list of dict
        ``{"altitude_m", "altitude_ft", "style" ('oxygen', 'limit' or 'expedition'),
        "label", "ids"}``, sorted by altitude.
    """
    lines: dict[tuple, dict] = {}
    for rs in rule_sets:
        if (rs.kind == "aviation") != (result.kind == "flight"):
            continue
        for th in rs.thresholds:
            if th.check in ("mask", "supply"):   # flight-level rules: the aircraft's altitude, not the cabin's
                continue
            if rs.kind == "aviation":
                ft = float(th.lower_ft)
                m = ft / _FT_PER_M
                style = "limit" if th.check == "limit" else "oxygen"
                where = f"{rs.label} {th.section}"
            else:
                if th.above_m is None:
                    continue
                m = float(th.above_m)
                ft = m * _FT_PER_M
                style = "expedition"
                where = f"{rs.label} above {th.above}"
            key = (round(ft), style)
            entry = lines.setdefault(key, {"altitude_m": m, "altitude_ft": ft, "style": style,
                                           "sources": [], "ids": []})
            if where not in entry["sources"]:
                entry["sources"].append(where)
            entry["ids"].append(f"{rs.id}:{th.id}")
    out = []
    for entry in lines.values():
        sources = "; ".join(entry.pop("sources"))
        if entry["style"] == "expedition":
            entry["label"] = f"{sources}: ascent-rate guidance (sleeping altitude)"
        else:
            word = "cabin limit" if entry["style"] == "limit" else "oxygen"
            entry["label"] = f"{entry['altitude_ft']:,.0f} ft {word}: {sources}"
        out.append(entry)
    return sorted(out, key=lambda e: (e["altitude_ft"], e["style"]))


def saturation_levels_pct(result) -> list[float]:
    """The plan's saturation levels [%], read from the summary (``hours_below_<n>_pct``)."""
    levels = []
    for key in result.summary:
        match = re.fullmatch(r"hours_below_(\d+)_pct", key)
        if match:
            levels.append(float(match.group(1)))
    return sorted(levels, reverse=True)


def _spans(result):
    """Per leg: (x0, x1) in chart time units, whether it breaks a rule, its flags, rest, oxygen."""
    scale = 24.0 if result.kind == "expedition" else 1.0
    out = []
    for leg in result.legs:
        broken = [k for k in leg["flags"] if result.findings[k].status in BROKEN_STATUSES]
        out.append({
            "leg": leg["leg"], "x0": leg["start_h"] / scale, "x1": (leg["start_h"] + leg["duration_h"]) / scale,
            "broken": broken, "rest": leg.get("activity") == "rest",
            "oxygen": bool(leg["oxygen_planned"]),
        })
    return out


def _spread_labels(fracs, gap):
    """Axes-fraction positions for labels at ``fracs`` (sorted), at least ``gap`` apart, in [0, 1]."""
    pos = list(fracs)
    for i in range(1, len(pos)):
        pos[i] = max(pos[i], pos[i - 1] + gap)
    top = 1.0 - gap / 2
    if pos and pos[-1] > top:
        pos[-1] = top
        for i in range(len(pos) - 2, -1, -1):
            pos[i] = min(pos[i], pos[i + 1] - gap)
    return pos


# -- the figure -------------------------------------------------------------------------------
def _steady_only(sao2_pct, validity_status):
    """Saturations with NaN (drawn as a gap) where there is no steady state."""
    import numpy as np

    from altox.physiology.validity import NO_STEADY_STATE

    sat = np.array(sao2_pct, dtype=float)
    if validity_status is not None:
        sat[np.asarray(validity_status) == NO_STEADY_STATE] = np.nan
    return sat


def _h_min(hours, _pos=None) -> str:
    """Hours as h:min (flights): 1.5 -> '1:30'."""
    minutes = int(round(hours * 60.0))
    return f"{minutes // 60}:{minutes % 60:02d}"


def _runs_of(mask):
    """(start, end) index pairs of the runs of True in a boolean array (end exclusive)."""
    import numpy as np

    edges = np.diff(np.concatenate(([0], np.asarray(mask, dtype=np.int8), [0])))
    return list(zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)))


def plan_figure(result, *, feet: bool = False, rule_sets=None, figsize=CHART_SIZE_IN):
    """A matplotlib :class:`~matplotlib.figure.Figure` (Agg canvas) of an evaluated plan.

    Parameters
    ----------
    result : altox.evaluation.evaluate.PlanResult
    feet : bool
        Expedition altitudes in feet (metres otherwise).  Flights are always drawn in feet of
        pressure altitude, as in the tables.  The other unit is on the right-hand axis.
    rule_sets : list of RuleSet, optional
        The rule sets to draw thresholds from; by default those of ``result.rule_sets`` that
        can be found (:func:`applied_rule_sets`).
    figsize : (float, float)
        Width and height in inches.
    """
    import matplotlib
    import numpy as np
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch
    from matplotlib.ticker import FuncFormatter, MaxNLocator, MultipleLocator
    from matplotlib.transforms import blended_transform_factory

    from altox.evaluation.evaluate import REFERENCE_PERSON

    if rule_sets is None:
        rule_sets = applied_rule_sets(result)[0]
    s = result.samples
    flight = result.kind == "flight"
    scale = 1.0 if flight else 24.0
    t0 = np.asarray(s["time_h"], dtype=float) / scale
    t1 = t0 + np.asarray(s["duration_h"], dtype=float) / scale
    x_mid = (t0 + t1) / 2.0
    total = float(t1[-1])

    use_ft = flight or feet
    unit = "ft" if use_ft else "m"
    other = "m" if use_ft else "ft"
    to_unit = (lambda m: np.asarray(m, dtype=float) * _FT_PER_M) if use_ft else (lambda m: np.asarray(m, dtype=float))

    with matplotlib.rc_context(_RC):
        fig = Figure(figsize=figsize, layout="constrained")
        FigureCanvasAgg(fig)
        ax_alt, ax_sat = fig.subplots(2, 1, sharex=True, height_ratios=[3, 2])
        fig.suptitle(_plain(result.name), fontsize=_FONT_PT + 3, fontweight="bold", color=_INK)
        ax_alt.set_title("altox model estimates for planning. Guidance only, never a clearance to fly, "
                         "climb or travel.", loc="left", fontsize=_LABEL_PT, style="italic", color=_INK)
        handles: list = []

        # -- altitude panel ------------------------------------------------------------
        if flight:
            from altox.physiology.atmosphere import barometric_pressure, pressure_altitude_ft

            aircraft_ft = np.asarray(pressure_altitude_ft(barometric_pressure(s["aircraft_altitude_m"], "isa")))
            cabin_ft = np.asarray(s["cabin_pressure_altitude_ft"], dtype=float)
            ax_alt.plot(x_mid, aircraft_ft, color=_ALT, lw=1.3, ls="-", zorder=4)
            ax_alt.plot(x_mid, cabin_ft, color=_CABIN, lw=2.4, ls=(0, (5, 2)), zorder=5)
            handles += [Line2D([], [], color=_ALT, lw=1.3, ls="-", label="aircraft pressure altitude"),
                        Line2D([], [], color=_CABIN, lw=2.4, ls=(0, (5, 2)), label="cabin pressure altitude")]
            y_top = float(max(aircraft_ft.max(), cabin_ft.max()))
            ax_alt.set_ylabel("Pressure altitude (ft)")
            peak_x, peak_y = x_mid[int(np.argmax(aircraft_ft))], float(aircraft_ft.max())
            peak_text = f"{peak_y:,.0f} ft"
        else:
            alt = to_unit(s["altitude_m"])
            sleeping = np.asarray(s["sleeping"], dtype=bool)
            ax_alt.stairs(alt, np.append(t0, t1[-1]), baseline=None, color=_ALT, lw=1.0, zorder=4)
            nx0, nx1, ny = [], [], []
            for i in np.flatnonzero(sleeping):      # one segment per night, not per sample
                if nx1 and abs(nx1[-1] - t0[i]) < 1e-9 and ny[-1] == alt[i]:
                    nx1[-1] = t1[i]
                else:
                    nx0.append(t0[i]), nx1.append(t1[i]), ny.append(alt[i])
            ax_alt.hlines(ny, nx0, nx1, color=_NIGHT, lw=3.4, zorder=5, capstyle="butt")
            hx, hy = [], []
            for leg in (leg for leg in result.legs if leg.get("high_altitude_m") is not None):
                idx = np.flatnonzero(np.asarray(s["leg"]) == leg["leg"])
                k = idx[int(np.argmax(np.asarray(s["altitude_m"])[idx]))]
                hx.append(x_mid[k])
                hy.append(float(to_unit(leg["high_altitude_m"])))
            ax_alt.plot(hx, hy, ls="none", marker="^", ms=6, mfc="white", mec=_ALT, mew=1.3, zorder=6)
            handles += [Line2D([], [], color=_ALT, lw=1.0, label="altitude through the day"),
                        Line2D([], [], color=_NIGHT, lw=3.4, label="asleep (sleeping altitude)")]
            if hx:
                handles.append(Line2D([], [], ls="none", marker="^", ms=6, mfc="white", mec=_ALT, mew=1.3,
                                      label="day's high point"))
            y_top = float(alt.max())
            ax_alt.set_ylabel(f"Altitude ({unit})")
            k = int(np.argmax(alt))
            peak_x, peak_y = x_mid[k], float(alt[k])
            peak_text = f"{peak_y:,.0f} {unit}"
        ax_alt.annotate(peak_text, (peak_x, peak_y), xytext=(0, 6), textcoords="offset points",
                        ha="center", va="bottom", fontsize=_LABEL_PT, color=_INK, zorder=7)

        # guidance thresholds (from the rule data), drawn when within reach of the profile
        lines = threshold_lines(result, rule_sets)
        reach = max(y_top * 1.3, 1.0)
        drawn = [ln for ln in lines if (ln["altitude_ft"] if use_ft else ln["altitude_m"]) <= reach]
        skipped = [ln for ln in lines if ln not in drawn]
        y_max = max([y_top, 1.0] + [(ln["altitude_ft"] if use_ft else ln["altitude_m"]) for ln in drawn]) * 1.12
        ax_alt.set_ylim(0.0, y_max)
        styles = {"oxygen": dict(ls=(0, (6, 2, 1, 2)), lw=1.1, color=_GUIDE),
                  "limit": dict(ls=(0, (1, 1)), lw=1.6, color=_BROKEN),
                  "expedition": dict(ls=(0, (9, 3)), lw=1.1, color=_GUIDE)}
        legend_of = {"oxygen": "guidance: cabin altitude asking for oxygen",
                     "limit": "guidance: cabin altitude limit",
                     "expedition": "guidance: ascent-rate rules apply above this sleeping altitude"}
        for ln in drawn:
            y = ln["altitude_ft"] if use_ft else ln["altitude_m"]
            art = ax_alt.axhline(y, zorder=3, **styles[ln["style"]])
            art.set_gid("altox-threshold-" + "-".join(i.replace(":", "_") for i in ln["ids"]))
        for style in ("oxygen", "limit", "expedition"):
            if any(ln["style"] == style for ln in drawn):
                handles.append(Line2D([], [], label=legend_of[style], **styles[style]))
        axes_h_pt = figsize[1] * 72.0 * 0.45
        fracs = [((ln["altitude_ft"] if use_ft else ln["altitude_m"]) / y_max) for ln in drawn]
        for ln, pos in zip(drawn, _spread_labels(fracs, (_LABEL_PT * 1.5) / axes_h_pt)):
            ax_alt.text(0.005, pos, _plain(ln["label"]), transform=ax_alt.transAxes, ha="left", va="center",
                        fontsize=_LABEL_PT - 0.5, color=_INK, zorder=3.5,   # under the data lines
                        bbox=dict(boxstyle="square,pad=0.1", fc="white", ec="none", alpha=0.8))
        if skipped:
            text = "Above the chart: " + "; ".join(
                (f"{ln['altitude_ft']:,.0f} ft" if use_ft else f"{ln['altitude_m']:,.0f} m")
                + f" ({_plain(ln['label'].split(': ', 1)[-1])})" for ln in skipped)
            ax_alt.text(0.995, 0.985, text, transform=ax_alt.transAxes, ha="right", va="top",
                        fontsize=_LABEL_PT - 1, color=_INK, wrap=True, zorder=8,
                        bbox=dict(boxstyle="square,pad=0.15", fc="white", ec="none", alpha=0.85))

        secondary = ax_alt.secondary_yaxis(
            "right", functions=((lambda v: v / _FT_PER_M, lambda v: v * _FT_PER_M) if use_ft
                                else (lambda v: v * _FT_PER_M, lambda v: v / _FT_PER_M)))
        secondary.set_ylabel(f"{'Pressure altitude' if flight else 'Altitude'} ({other})")
        thousands = FuncFormatter(lambda v, _pos: f"{v:,.0f}")
        ax_alt.yaxis.set_major_formatter(thousands)
        secondary.yaxis.set_major_formatter(thousands)

        # -- SaO2 panel ----------------------------------------------------------------
        # no saturation where there is no steady state: a marked gap, never a line down to a few %
        ref = _steady_only(s["sao2_pct"], s.get("validity_status"))
        members = [_steady_only(m["sao2_pct"], m.get("validity_status")) for m in result.member_samples.values()]
        edges = np.append(t0, t1[-1])
        if members:
            stack = np.vstack(members)
            lo, hi = stack.min(axis=0), stack.max(axis=0)
            if flight:
                ax_sat.fill_between(x_mid, lo, hi, color=_BAND, lw=0, zorder=1)
            else:
                ax_sat.stairs(hi, edges, baseline=lo, fill=True, color=_BAND, lw=0, zorder=1)
            for m in members:
                if flight:
                    ax_sat.plot(x_mid, m, color=_MEMBER, lw=0.7, alpha=0.55, zorder=2)
                else:
                    ax_sat.stairs(m, edges, baseline=None, color=_MEMBER, lw=0.7, alpha=0.55, zorder=2)
        if flight:
            ax_sat.plot(x_mid, ref, color=_REF, lw=2.0, zorder=4)
        else:
            ax_sat.stairs(ref, edges, baseline=None, color=_REF, lw=2.0, zorder=4)
        subj = result.summary.get("subject") or {}
        if subj.get("role") == "patient":
            ref_label = (f"SaO2 on air, {subj['name']} (patient, age {subj['age_y']:.0f}, "
                         f"Hb {subj['hemoglobin_g_dl']:g} g/dL)")
        else:
            ref_label = (f"SaO2, {REFERENCE_PERSON['name']} (age {REFERENCE_PERSON['age_y']:.0f}, "
                         f"Hb {REFERENCE_PERSON['hemoglobin_g_dl']:g} g/dL)")
        handles.append(Line2D([], [], color=_REF, lw=2.0, label=ref_label))
        if members:
            handles += [Line2D([], [], color=_MEMBER, lw=0.7, alpha=0.55,
                               label=f"SaO2, each person ({len(members)})"),
                        Patch(facecolor=_BAND, edgecolor="none", label="range between the people")]
        unsteady = np.zeros(t0.size, dtype=bool)
        for v in [ref] + members:
            unsteady |= np.isnan(v)
        for a, b in _runs_of(unsteady):
            ax_sat.axvspan(t0[a], t1[b - 1], facecolor="white", edgecolor=_INK, hatch="xx", lw=0.8,
                           zorder=5).set_gid(f"altox-no-steady-state-{a}")
            ax_sat.text((t0[a] + t1[b - 1]) / 2, 0.5, "no steady state", rotation=90, ha="center", va="center",
                        transform=blended_transform_factory(ax_sat.transData, ax_sat.transAxes),
                        fontsize=_LABEL_PT - 0.5, color=_INK, zorder=8,
                        bbox=dict(boxstyle="square,pad=0.1", fc="white", ec="none"))
        if unsteady.any():
            handles.append(Patch(facecolor="white", edgecolor=_INK, hatch="xx", lw=0.8,
                                 label="no steady state: no saturation shown"))
        levels = saturation_levels_pct(result)
        finite = [v[np.isfinite(v)] for v in [ref] + members]
        low = min([float(v.min()) for v in finite if v.size] + levels + [100.0])
        ax_sat.set_ylim(max(0.0, np.floor(low / 5.0) * 5.0 - 2.0), 100.5)
        for lvl in levels:
            ax_sat.axhline(lvl, color=_LEVEL, lw=1.0, ls=(0, (1, 2)), zorder=3)
            ax_sat.text(0.003, lvl, f"{lvl:g} %", transform=blended_transform_factory(ax_sat.transAxes, ax_sat.transData),
                        ha="left", va="bottom", fontsize=_LABEL_PT - 0.5, color=_INK, zorder=8)
        if levels:
            handles.append(Line2D([], [], color=_LEVEL, lw=1.0, ls=(0, (1, 2)), label="plan's saturation levels"))
        ax_sat.set_ylabel("Expected SaO2 at rest, on air (%)")
        ax_sat.yaxis.set_major_locator(MaxNLocator(nbins=6, integer=True, prune="lower"))  # clear of the time axis

        # -- legs: broken rules, rest days, oxygen -------------------------------------
        spans = _spans(result)
        for sp in spans:
            for panel, ax in (("alt", ax_alt), ("sat", ax_sat)):
                if sp["rest"]:
                    ax.axvspan(sp["x0"], sp["x1"], facecolor=_REST, edgecolor="none", lw=0,
                               zorder=0).set_gid(f"altox-rest-leg-{sp['leg']}-{panel}")
                if sp["broken"]:
                    ax.axvspan(sp["x0"], sp["x1"], facecolor="none", edgecolor=_BROKEN, hatch="///", lw=0,
                               zorder=0.5, alpha=0.65).set_gid(f"altox-broken-leg-{sp['leg']}-{panel}")
            if sp["broken"]:
                ax_alt.text((sp["x0"] + sp["x1"]) / 2, 0.975, ", ".join(f"{FLAG_BROKEN}{k + 1}" for k in sp["broken"]),
                            transform=blended_transform_factory(ax_alt.transData, ax_alt.transAxes),
                            ha="center", va="top", fontsize=_LABEL_PT, fontweight="bold", color=_BROKEN,
                            zorder=8)
            if sp["oxygen"]:
                ax_alt.axvspan(sp["x0"], sp["x1"], ymin=0.0, ymax=0.045, facecolor="white", edgecolor=_O2,
                               hatch="xxxx", lw=0.8, zorder=6).set_gid(f"altox-oxygen-leg-{sp['leg']}")
        if any(sp["broken"] for sp in spans):
            handles.append(Patch(facecolor="none", edgecolor=_BROKEN, hatch="///", lw=0, alpha=0.65,
                                 label="guidance not met (breaks n: finding n of the verdict)"))
        if any(sp["rest"] for sp in spans):
            handles.append(Patch(facecolor=_REST, edgecolor="none", label="rest day"))
        if any(sp["oxygen"] for sp in spans):
            handles.append(Patch(facecolor="white", edgecolor=_O2, hatch="xxxx", lw=0.8,
                                 label="supplemental oxygen planned (values are on air)"))

        # -- axes ------------------------------------------------------------------------
        ax_sat.set_xlim(0.0, total)
        if flight:
            ax_sat.set_xlabel("Time from the start of the first leg (h:min)")
            ax_sat.xaxis.set_major_formatter(FuncFormatter(_h_min))
        else:
            ax_sat.set_xlabel("Time from the start of day 1 (days)")
            ax_sat.xaxis.set_major_locator(MultipleLocator(1 if total <= 31 else 7))
        for ax in (ax_alt, ax_sat):
            ax.grid(True, axis="y", color="#d9d9d9", lw=0.6, zorder=0)
            ax.set_axisbelow(True)
            for side in ("top",):
                ax.spines[side].set_visible(False)
        fig.legend(handles=handles, loc="outside lower center", ncols=3, frameon=False,
                   fontsize=_LABEL_PT, handlelength=3.2)
    return fig


def render_chart(result, fmt: str, *, feet: bool = False, rule_sets=None, figsize=CHART_SIZE_IN,
                 dpi: float = CHART_DPI) -> bytes:
    """The chart as bytes in ``fmt`` (``'png'``, ``'svg'`` or ``'pdf'``)."""
    import matplotlib

    if fmt not in CHART_FORMATS.values():
        from altox.errors import AltoxError

        raise AltoxError(f"chart format {fmt!r} is not supported; expected png, svg or pdf",
                         field="format", value=fmt, expected="png, svg or pdf")
    fig = plan_figure(result, feet=feet, rule_sets=rule_sets, figsize=figsize)
    metadata = {"png": {"Software": None}, "svg": {"Date": None, "Creator": "altox"},
                "pdf": {"CreationDate": None, "ModDate": None, "Creator": "altox"}}[fmt]
    buf = io.BytesIO()
    with matplotlib.rc_context(_RC):
        fig.savefig(buf, format=fmt, dpi=dpi, metadata=metadata)
    return buf.getvalue()


def chart_svg_inline(result, *, feet: bool = False, rule_sets=None, figsize=CHART_SIZE_IN) -> str:
    """The chart as an ``<svg>`` element for embedding in HTML.

    The XML prolog, doctype and metadata block are dropped and the fixed width and height
    are removed (the ``viewBox`` stays), so the chart scales with the page.
    """
    text = render_chart(result, "svg", feet=feet, rule_sets=rule_sets, figsize=figsize).decode("utf-8")
    text = text[text.index("<svg"):]
    text = re.sub(r"<metadata>.*?</metadata>\s*", "", text, flags=re.S)
    head_end = text.index(">")
    head = re.sub(r'\s(width|height)="[^"]*"', "", text[:head_end])
    return head + text[head_end:]


def chart_format(path) -> str:
    """The chart format of an output path from its suffix (AltoxError for others)."""
    from altox.errors import AltoxError

    suffix = Path(path).suffix.lower()
    if suffix not in CHART_FORMATS:
        raise AltoxError(f"--chart: {str(path)!r} must end in .png, .svg or .pdf", field="--chart",
                         value=str(path), expected=".png, .svg or .pdf")
    return CHART_FORMATS[suffix]


def save_chart(result, path, *, feet: bool = False, rule_sets=None, figsize=CHART_SIZE_IN,
               dpi: float = CHART_DPI) -> Path:
    """Write the chart to ``path`` (format by suffix) through a temporary file in the same folder.

    The caller decides whether an existing file may be replaced (:func:`altox.present.outfiles.check_output`).
    """
    from altox.present.outfiles import write_atomic

    data = render_chart(result, chart_format(path), feet=feet, rule_sets=rule_sets, figsize=figsize, dpi=dpi)
    return write_atomic(path, data)
