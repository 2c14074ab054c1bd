"""The analysis tabs of the dashboard: modes and step limits, frequency response, and
runs with their figures. Every number comes from the library's public API; this
module only asks for it, keeps it for the session and draws it.

Settings live in ``st.session_state`` under the keys of :data:`SETTING_KEYS`. The
tabs are lazy (only the open one runs), so :func:`keep_settings` carries the values
of widgets in closed tabs over from run to run, and :func:`reset_settings` puts a
newly opened system's defaults in place. The stepper, step and duration are shared
by the step check and the run.
"""

from __future__ import annotations

import functools
import math
import re
import time
from collections import OrderedDict

import numpy as np
import streamlit as st

import lumped
import lumped.excitation
import lumped.frequency
import lumped.metrics
import lumped.modal
import lumped.simulate
import lumped.stability
from dashboard import choices, figures, tables
from lumped.units import display

STEP_KEYS = ("step_stepper", "step_dt", "step_duration")
RUN_KEYS = ("run_rate", "run_anyway", "run_channels")
MODE_KEYS = ("mode_pick",)
RESPONSE_KEYS = ("fr_input", "fr_output", "fr_quantity")
ROAD_KEYS = ("road_class", "road_speed", "road_supports")
SETTING_KEYS = STEP_KEYS + RUN_KEYS + MODE_KEYS + RESPONSE_KEYS + ROAD_KEYS

#: Runs kept per session (each keeps all its samples), and the most memory they may
#: take together (the newest run is kept whatever its size).
RUN_CACHE_SIZE = 3
RUN_CACHE_BYTES = 512 * 2**20
#: Runs with more body-steps than this get a warning before they start.
LONG_RUN_BODY_STEPS = 50_000_000
#: Road figures are computed without asking up to this many bodies.
ROAD_AUTO_BODIES = 200

_CHART_CONFIG = {"displaylogo": False}


def _md(text: object) -> str:
    return tables.md_escape(text)


def _table_height(rows: int, most: int = 12) -> int | str:
    """Tables fit their rows, up to ``most`` rows; longer ones scroll."""
    return "auto" if rows <= 10 else 38 + 35 * min(rows, most)


def _library_error(exc: Exception, what: str) -> None:
    """A library error as a clear message (never a traceback)."""
    st.error(f"**{what}:** {_md(exc)}", icon=":material/error:")


# --------------------------------------------------------------------------- cached results


@st.cache_resource(show_spinner=False, max_entries=8)
def _matrices(system_key: str, _system: lumped.System) -> lumped.Matrices:
    return lumped.assemble(_system)


@st.cache_resource(show_spinner=False, max_entries=8)
def _modes(system_key: str, _system: lumped.System):
    """("modes", ModalResult) or, for systems too large for a full modal analysis,
    ("bound", StiffestMode, the library's reason)."""
    matrices = _matrices(system_key, _system)
    try:
        return ("modes", lumped.modal.modal_analysis(matrices))
    except lumped.LumpedError as exc:  # over the size limit of a full modal analysis
        if matrices.n == 0:
            raise
        return ("bound", lumped.modal.stiffest_mode(matrices), str(exc))


@st.cache_resource(show_spinner=False, max_entries=64)
def _check(system_key: str, _system: lumped.System, stepper: str, dt: float, duration: float):
    matrices = _matrices(system_key, _system)
    return lumped.stability.check_step(matrices, lumped.get_stepper(stepper), dt, duration)


@st.cache_resource(show_spinner=False, max_entries=32)
def _transfer(system_key: str, _system: lumped.System, input_id: str, output_id: str,
              quantity: str):  # fmt: skip
    return lumped.frequency.transfer(_system, input_id, output_id, quantity)


@st.cache_resource(show_spinner=False, max_entries=32)
def _road(system_key: str, _system: lumped.System, road_class: str, speed: float,
          supports: tuple[str, ...] | None, items: tuple | None):  # fmt: skip
    """Road figures; ``items`` (bodies, travel, loads) as :func:`choices.figure_items`."""
    bodies, travel, loads = (list(group) for group in items) if items else (None, None, None)
    return lumped.metrics.road_figures(
        _system, road_class=road_class, speed=speed,
        supports=list(supports) if supports is not None else None,
        bodies=bodies, travel=travel, loads=loads,
    )  # fmt: skip


# --------------------------------------------------------------------------- settings


def keep_settings() -> None:
    """Keep the values of widgets that are not drawn in this run (closed tabs)."""
    state = st.session_state
    for key in SETTING_KEYS:
        if key in state:
            state[key] = state[key]


def _roads(system: lumped.System) -> list:
    return [i for i in system.inputs.values() if isinstance(i, lumped.RoadInput)]


def reset_settings(system: lumped.System, system_key: str) -> None:
    """Put the defaults of ``system`` in place when it is not the one they were set for:
    stepper, step, duration and output rate from the file's [run] table (a short run
    for a large system; the library's recommended step when the file gives none)."""
    state = st.session_state
    if state.get("settings_for") == system_key:
        return
    state.settings_for = system_key
    notes = []
    run = system.run
    stepper = run.stepper if run.stepper in lumped.STEPPERS else "rk4"
    if run.stepper and run.stepper not in lumped.STEPPERS:
        notes.append(f"The file's stepper {run.stepper!r} is not a fixed-step stepper of the "
                     "catalogue; the page starts with rk4.")  # fmt: skip
    dt = run.dt
    if dt is None:
        try:
            dt = _check(system_key, system, stepper, 1e-3, 1.0).recommended_dt
            notes.append("The file gives no step: the page starts with the step the check "
                         f"recommends for {stepper}.")  # fmt: skip
        except lumped.LumpedError:
            dt = None
        if dt is None or not np.isfinite(dt):
            dt = 1e-3
    duration = run.duration if run.duration is not None else 1.0
    if (
        len(system.bodies) > choices.LARGE_SYSTEM_BODIES
        and duration > choices.LARGE_SYSTEM_DURATION
    ):
        notes.append(
            f"{len(system.bodies):,} bodies: the page starts with a "
            f"{choices.time_text(choices.LARGE_SYSTEM_DURATION)} run (the file asks for "
            f"{choices.time_text(duration)}) so that a run does not hold the page for long."
        )
        duration = choices.LARGE_SYSTEM_DURATION
    rate = display(run.output_rate, "frequency") if run.output_rate else choices.PAGE_OUTPUT_RATE
    state.step_stepper = stepper
    state.step_dt = choices.time_text(dt)
    state.step_duration = choices.time_text(duration)
    state.run_rate = rate
    state.run_anyway = False
    state.setting_notes = notes
    for key in ("run_channels", "mode_pick"):
        state.pop(key, None)
    state.fr_input = choices.default_input(system)
    state.fr_output = choices.default_output(system)
    state.fr_quantity = "displacement"
    roads = _roads(system)
    state.road_class = roads[0].road_class if roads else "C"
    state.road_speed = float(roads[0].speed) if roads else 20.0
    moving = [s.id for s in system.supports.values() if s.motion]
    state.road_supports = moving or list(system.supports)
    state.run_error = None


def _step_settings(with_rate: bool = False) -> tuple[str, float | None, float | None]:
    """The shared stepper, step and duration widgets (and the run's output rate when
    ``with_rate``); problems with what was typed are shown under them."""
    widths = [4, 1, 1, 1] if with_rate else [4, 1, 1]
    cols = st.columns(widths)
    with cols[0]:
        stepper = st.selectbox(
            "Stepper", list(lumped.STEPPERS), key="step_stepper",
            format_func=lambda s: f"{s} — {choices.stepper_label(s)}",
        )  # fmt: skip
    with cols[1]:
        dt_text = st.text_input("Step dt", key="step_dt", help="With its unit, e.g. 0.2 ms.")
    with cols[2]:
        duration_text = st.text_input(
            "Duration", key="step_duration", help="With its unit, e.g. 3 s."
        )
    if with_rate:
        with cols[3]:
            st.text_input(
                "Output rate", key="run_rate",
                help="Samples kept per second, with its unit (e.g. 1 kHz); empty = every step.",
            )  # fmt: skip
    dt, dt_error = choices.parse_positive(dt_text, "time", "step dt")
    duration, duration_error = choices.parse_positive(duration_text, "time", "duration")
    for error in (dt_error, duration_error):
        if error:
            st.error(_md(error), icon=":material/error:")
    return stepper, dt, duration


def _verdict(check) -> None:
    """The step check's verdict, prominently: stable (success) or unstable (error)."""
    what = (f"**{check.stepper}** at dt = {choices.time_text(check.dt)} over "
            f"{choices.time_text(check.duration)} ({check.steps:,} steps)")  # fmt: skip
    limit = tables.step_text(check.max_stable_dt)
    if check.limiting_mode is not None:
        mode = check.modes[check.limiting_mode]
        state = getattr(mode, "state", "linearised")
        where = {"linearised": "", "": "", "bound": " (a bound on the stiffest mode)"}.get(
            state, f" of the {state}"
        )
        setter = (f"the {mode.natural_frequency_hz:.5g} Hz mode{where} (damping ratio "
                  f"{mode.damping_ratio:.3g})")  # fmt: skip
    else:
        setter = None
    if check.stable:
        if math.isinf(check.max_stable_dt):
            tail = " Stable at any step on this system."
        else:
            tail = f" Stability limit {limit}" + (f", set by {setter}." if setter else ".")
        st.success(f"**Stable:** {what}.{tail}", icon=":material/check_circle:")
    elif check.max_stable_dt is None:
        st.error(
            f"**Unstable:** {what}. No positive step is stable with {check.stepper} on this "
            f"system" + (f" ({setter})." if setter else ".") + " Choose another stepper.",
            icon=":material/dangerous:",
        )
    else:
        st.error(
            f"**Unstable:** {what}. The step is too large for {setter}: the stability limit "
            f"is {limit}; the recommended step is {tables.step_text(check.recommended_dt)}.",
            icon=":material/dangerous:",
        )


def _checked(system: lumped.System, system_key: str, stepper, dt, duration):
    """The step check for the settings, or None (its problem shown)."""
    if dt is None or duration is None:
        return None
    try:
        with st.spinner("Checking the step against every mode…"):
            return _check(system_key, system, stepper, dt, duration)
    except lumped.LumpedError as exc:
        _library_error(exc, "Step check")
        return None


# --------------------------------------------------------------------------- modes tab


def modes_tab(system: lumped.System, system_key: str) -> None:
    state = st.session_state
    st.subheader("Modes", anchor=False)
    if not system.bodies:
        st.info("The system has no bodies, so it has no modes.")
        return
    try:
        with st.spinner(f"Finding the modes of {len(system.bodies):,} bodies…"):
            found = _modes(system_key, system)
    except lumped.LumpedError as exc:
        _library_error(exc, "Modal analysis")
        found = None
    if found is not None and found[0] == "modes":
        modal = found[1]
        damping = "classical" if modal.classical_damping else "non-proportional"
        st.caption(
            f"{len(modal.modes):,} mode{'' if len(modal.modes) == 1 else 's'} of the system linearised at static equilibrium "
            f"({damping} damping). Natural frequency = |λ|/2π of the damped eigenvalue, "
            "damping ratio = −Re λ/|λ|; the shape is the undamped mode's, mass-normalised."
        )
        left, right = st.columns([4, 3], gap="large")
        with left:
            numbers = ["natural [Hz]", "damped [Hz]", "undamped [Hz]", "damping ratio"]
            st.dataframe(
                tables.as_text(tables.modes_frame(modal), numbers, 5), hide_index=True,
                key="modes_table", height=_table_height(len(modal.modes)),
                column_config={
                    "mode": st.column_config.NumberColumn("mode", width=50),
                    **{c: st.column_config.TextColumn(c, alignment="right") for c in numbers},
                },
            )  # fmt: skip
        with right:
            count = len(modal.modes)
            if state.get("mode_pick") not in range(count):
                state.mode_pick = 0
            pick = st.selectbox(
                "Mode shape", list(range(count)), key="mode_pick",
                format_func=lambda k: f"mode {k + 1} · {modal.modes[k].natural_frequency_hz:.4g} Hz"
                f" · {tables.mode_kind(modal.modes[k])}",
            )  # fmt: skip
            st.plotly_chart(figures.mode_shape(modal.modes[pick], pick + 1), key="mode_chart",
                            config=_CHART_CONFIG)  # fmt: skip
    elif found is not None:
        _, top, reason = found
        st.info(
            f"{_md(reason)}. The step check below uses a guaranteed bound on the stiffest mode: "
            f"|λ| ≤ {top.bound:.6g} rad/s (estimate {top.estimate:.6g} rad/s, damping ratio "
            f"{top.damping_ratio:.3g}).",
            icon=":material/info:",
        )

    st.subheader("Step check", anchor=False)
    st.caption(
        "Whether a stepper at this step stays stable on every mode over the run, which mode "
        "sets the limit, and a recommended step. The settings are shared with the Run tab."
    )
    stepper, dt, duration = _step_settings()
    check = _checked(system, system_key, stepper, dt, duration)
    if check is None:
        return
    _verdict(check)
    cols = st.columns(4)
    if check.limiting_mode is not None:
        mode = check.modes[check.limiting_mode]
        setter = (f"Set by mode {check.limiting_mode + 1}", f"{mode.natural_frequency_hz:.4g} Hz")
    else:
        setter = ("Set by", "no mode")
    cols[0].metric("Stability limit", tables.step_text(check.max_stable_dt))
    cols[1].metric(*setter)
    cols[2].metric("Growth over the run", tables.number_text(check.growth_over_run),
                   help="Largest amplitude factor of any mode over the whole run (1 = none).")  # fmt: skip
    cols[3].metric("Recommended dt", tables.step_text(check.recommended_dt))
    st.caption(f"Recommended: {_md(check.recommendation_rule)}. From {_md(check.source)}.")
    for note in check.notes:
        st.info(_md(note), icon=":material/info:")
    st.dataframe(tables.check_modes_frame(check), hide_index=True, key="check_table",
                 height=_table_height(len(check.modes)))  # fmt: skip
    st.caption(
        "Per mode at the chosen step: its own step limit, the spectral radius of one step, the "
        "growth of its amplitude over the run, and the stepper's numerical damping ratio and "
        "period error (T numerical / T − 1). The state says which linearisation a mode belongs "
        "to: at static equilibrium, or in the stiffest contact state of a nonlinear system."
    )


# --------------------------------------------------------------------------- frequency tab


def response_tab(system: lumped.System, system_key: str) -> None:
    state = st.session_state
    inputs, outputs = choices.input_choices(system), choices.output_choices(system)
    if not inputs or not outputs:
        st.info("The system needs at least one body for a frequency response.")
        return
    for key, options in (("fr_input", inputs), ("fr_output", outputs)):
        if state.get(key) not in options:
            state[key] = next(iter(options))
    cols = st.columns([2, 2, 1])
    with cols[0]:
        chosen_in = st.selectbox("Input", list(inputs), key="fr_input", format_func=inputs.get)
    with cols[1]:
        chosen_out = st.selectbox("Output", list(outputs), key="fr_output",
                                  format_func=outputs.get)  # fmt: skip
    out_kind, out_id = choices.split_choice(chosen_out)
    quantities = choices.quantity_choices(out_kind)
    if state.get("fr_quantity") not in quantities:
        state.fr_quantity = quantities[0]
    with cols[2]:
        quantity = st.selectbox("Quantity", quantities, key="fr_quantity")
    _, in_id = choices.split_choice(chosen_in)
    try:
        with st.spinner("Solving the frequency response…"):
            transfer = _transfer(system_key, system, in_id, out_id, quantity)
    except lumped.LumpedError as exc:
        _library_error(exc, "Frequency response")
        return
    st.plotly_chart(
        figures.response_plot(transfer), key="response_chart",
        config={**_CHART_CONFIG, "toImageButtonOptions": {"filename": "frequency_response",
                                                          "format": "png", "scale": 2}},
    )  # fmt: skip
    st.caption(
        f"{_md(transfer.label)}, {len(transfer.frequency):,} frequencies. Per unit input, of the "
        "system linearised at static equilibrium: end stops, one-sided springs and asymmetric "
        "dampers enter by their static linearisation."
    )
    st.markdown("**Peaks**")
    if transfer.peaks:
        frame = tables.peaks_frame(transfer)
        numbers = [c for c in frame.columns if c != "peak"]
        st.dataframe(
            tables.as_text(frame, numbers, 5), hide_index=True, key="peaks_table",
            width="content", height=_table_height(len(frame), 15),
            column_config={c: st.column_config.TextColumn(c, alignment="right", width=130)
                           for c in numbers},
        )  # fmt: skip
    else:
        st.caption("No resonance peak on this response.")


# --------------------------------------------------------------------------- run tab


def _settings_key(system_key, stepper, dt, duration, rate) -> tuple:
    return (system_key, stepper, dt, duration, rate)


def _settings_text(settings: dict) -> str:
    rate = display(settings["rate"], "frequency") if settings["rate"] else "every step"
    return (f"{settings['stepper']} · dt {choices.time_text(settings['dt'])} · "
            f"{choices.time_text(settings['duration'])} · output {rate}")  # fmt: skip


def _start_run(system, system_key, stepper, dt, duration, rate) -> None:
    """Run with a progress bar; keep the result in the session, or the library's
    message when it refuses (the previous results stay)."""
    state = st.session_state
    key = _settings_key(system_key, stepper, dt, duration, rate)
    runs: OrderedDict = state.setdefault("runs", OrderedDict())
    if key in runs:
        runs.move_to_end(key)
        state.run_shown, state.run_error = key, None
        return
    bar = st.progress(0.0, text="Starting the run…")
    started = time.perf_counter()

    def progress(fraction: float) -> None:
        fraction = min(max(float(fraction), 0.0), 1.0)
        bar.progress(fraction, text=f"Running… {fraction:.0%}")

    try:
        result = lumped.simulate.simulate(
            system, stepper, dt, duration, output_rate=rate, progress=progress
        )
    except lumped.LumpedError as exc:
        bar.empty()
        state.run_error = {"key": key, "message": str(exc)}
        return
    elapsed = time.perf_counter() - started
    bar.progress(1.0, text=f"Run {result.status} in {elapsed:.2f} s")
    runs[key] = {
        "key": key,
        "system_key": system_key,
        "settings": {"stepper": stepper, "dt": dt, "duration": duration, "rate": rate},
        "result": result,
        "elapsed": elapsed,
        "figures": {},
    }
    while len(runs) > 1 and (len(runs) > RUN_CACHE_SIZE or _kept_bytes(runs) > RUN_CACHE_BYTES):
        runs.popitem(last=False)  # the oldest run goes first; the newest always stays
    state.run_shown, state.run_error = key, None


def _kept_bytes(runs) -> int:
    return sum(
        values.nbytes
        for bundle in runs.values()
        for _, values in bundle["result"].channels().values()
    )


def _run_figures(system, bundle) -> tuple[list | None, str | None, tuple | None]:
    """The run's figures table (cached with the run), or the library's reason."""
    items = choices.figure_items(system)
    cache = bundle["figures"]
    if items not in cache:
        try:
            if items is None:
                cache[items] = (lumped.metrics.run_figures(system, bundle["result"]), None)
            else:
                bodies, travel, loads = items
                cache[items] = (
                    lumped.metrics.run_figures(
                        system,
                        bundle["result"],
                        bodies=list(bodies),
                        travel=list(travel),
                        loads=list(loads),
                    ),
                    None,
                )
        except lumped.LumpedError as exc:
            cache[items] = (None, str(exc))
    rows, error = cache[items]
    return rows, error, items


def _results(system: lumped.System, system_key: str, current_key: tuple | None) -> None:
    state = st.session_state
    bundle = state.get("runs", {}).get(state.get("run_shown"))
    if bundle is None or bundle["system_key"] != system_key:
        st.caption("No run yet for this system.")
        return
    result = bundle["result"]
    st.subheader("Results", anchor=False)
    st.caption(
        f"{_md(_settings_text(bundle['settings']))} · {result.steps:,} steps · "
        f"{len(result.time):,} samples · {bundle['elapsed']:.2f} s on this machine"
    )
    if current_key is not None and bundle["key"] != current_key:
        st.info("These results are from the settings named above, not the current ones: "
                "press **Run** to update them.", icon=":material/history:")  # fmt: skip
    if result.status == "diverged":
        message = result.message[:1].upper() + result.message[1:]
        st.error(f"**Stopped early.** {_md(message)}", icon=":material/dangerous:")
    elif result.status != "completed":
        st.warning(f"**Run {result.status}.** {_md(result.message)}", icon=":material/warning:")

    balance = float(np.max(np.abs(result.balance_error))) if len(result.time) else 0.0
    ratio = result.balance_ratio
    cols = st.columns(4)
    cols[0].metric("Status", result.status)
    cols[1].metric("Samples", f"{len(result.time):,}")
    cols[2].metric("Events", f"{len(result.events):,}")
    cols[3].metric("Energy balance error", f"{balance:.3e} J",
                   delta=f"{tables.number_text(100 * ratio, 3)} % of the energy passed",
                   delta_color="off", delta_arrow="off",
                   help="Largest |kinetic + stored + dissipated − initial − work done| over "
                   "the run, and that as a share of the energy that passed through the "
                   "system: the stepper's error on the energy balance.")  # fmt: skip
    if result.status == "completed" and ratio > lumped.simulate.BALANCE_WARNING:
        st.warning(
            f"**Poor energy balance:** the error is {tables.number_text(100 * ratio, 3)} % of the "
            f"energy through the system (more than "
            f"{100 * lumped.simulate.BALANCE_WARNING:g} %): the step is too large for an "
            "accurate run. Try the recommended step.",
            icon=":material/warning:",
        )

    stem = re.sub(r"[^\w.-]+", "_", system_key.split(":")[1].removesuffix(".toml"))[:40]
    st.download_button(
        "Download the run (CSV)", data=functools.partial(tables.run_csv_bytes, result),
        file_name=f"{stem}_{result.stepper}.csv", mime="text/csv", key="run_csv",
        on_click="ignore", icon=":material/download:",
        help="Every channel at every kept sample: time first, then ID.quantity [unit].",
    )  # fmt: skip

    channels = result.channels()
    names = [n for n in channels if n != "time"]
    if not set(state.get("run_channels") or []) <= set(names) or "run_channels" not in state:
        state.run_channels = choices.default_channels(system, names)
    picked = st.multiselect(
        "Channels", names, key="run_channels",
        format_func=lambda n: f"{n} [{tables.unit_text(channels[n][0])}]",
    )  # fmt: skip
    if picked:
        series = [(n, channels[n][0], channels[n][1]) for n in picked]
        st.plotly_chart(figures.time_series(result.time, series), key="run_chart",
                        config=_CHART_CONFIG)  # fmt: skip
    else:
        st.caption("Pick channels to plot them against time.")
    st.caption(
        "Displacements are from static equilibrium; element forces are total forces (static "
        "included, tension positive); deflections are from static equilibrium."
    )

    st.markdown("**Events**")
    if result.events:
        st.dataframe(tables.events_frame(result.events), hide_index=True, key="events_table",
                     width="content", height=_table_height(len(result.events), 8),
                     column_config={"time [s]": st.column_config.NumberColumn(format="%.6g")})  # fmt: skip
    else:
        st.caption("No events: no contact changed and no support jumped.")
    st.markdown("**Figures of the run**")
    rows, error, items = _run_figures(system, bundle)
    if error:
        st.warning(_md(error), icon=":material/warning:")
    else:
        for note in rows.notes:
            st.warning(_md(note), icon=":material/warning:")
        _figures_table(rows, "run_figures_table")
        _covered_note(system, items)


def _covered_note(system: lumped.System, items) -> None:
    if items is not None:
        covered = ", ".join(dict.fromkeys(i for group in items for i in group))
        st.caption(
            f"{len(system.bodies):,} bodies: the table covers {_md(covered)} "
            "(a row per item would take long and read badly)."
        )


def _fit(texts, most: int = 340) -> int:
    """A column width (px) that shows the longest of ``texts`` whole, up to ``most``."""
    return min(most, 24 + 7 * max((len(str(t)) for t in texts), default=4))


def _figures_table(rows, key: str) -> None:
    frame = tables.figures_frame(rows)
    st.dataframe(
        tables.as_text(frame, ["value"], 4), hide_index=True, key=key,
        height=_table_height(len(rows), 30),
        column_config={
            "figure": st.column_config.TextColumn("figure", width=_fit(frame["figure"])),
            "item": st.column_config.TextColumn("item", width=_fit(frame["item"], 200)),
            "value": st.column_config.TextColumn("value", alignment="right", width=80),
            "unit": st.column_config.TextColumn("unit", width=_fit(frame["unit"], 90)),
            "rule": st.column_config.TextColumn("rule", width="large"),
        },
    )  # fmt: skip


def _road_section(system: lumped.System, system_key: str) -> None:
    st.subheader("Road figures (spectral)", anchor=False)
    if not system.supports:
        st.caption("The system has no support for a road to drive.")
        return
    roads = _roads(system)
    st.caption(
        "Ride, travel and tyre-load figures under a random ISO 8608 road, from the frequency "
        "response of the system linearised at static equilibrium: no run needed, so designs "
        "can be ranked quickly. End stops, lift-off and asymmetric dampers act only in a run."
    )
    cols = st.columns([1, 1, 2])
    with cols[0]:
        road_class = st.selectbox("ISO 8608 road class", list(choices.ROAD_CLASSES),
                                  key="road_class")  # fmt: skip
    with cols[1]:
        speed = st.number_input("Speed [m/s]", min_value=0.1, max_value=200.0, step=1.0,
                                key="road_speed")  # fmt: skip
    supports = None
    with cols[2]:
        if roads:
            st.caption(f"Replaces the class and speed of the file's road "
                       f"{_md(', '.join(r.id for r in roads))}.")  # fmt: skip
        else:
            supports = st.multiselect("Supports the road drives", list(system.supports),
                                      key="road_supports")  # fmt: skip
    if supports is not None and not supports:
        st.caption("Pick at least one support.")
        return
    items = choices.figure_items(system)
    args = (system_key, system, road_class, float(speed), tuple(supports) if supports else None,
            items)  # fmt: skip
    asked = st.session_state.setdefault("road_asked", set())  # settings computed on request
    request = (system_key, *args[2:])
    if len(system.bodies) > ROAD_AUTO_BODIES and request not in asked:
        if not st.button("Compute road figures", key="road_button",
                         help="Spectral integrals over the response of every item covered."):  # fmt: skip
            st.caption(f"{len(system.bodies):,} bodies: the road figures are computed on request.")
            return
        asked.add(request)
    try:
        with st.spinner("Integrating the road spectrum…"):
            rows = _road(*args)
    except lumped.LumpedError as exc:
        _library_error(exc, "Road figures")
        return
    _figures_table(rows, "road_figures_table")
    _covered_note(system, items)


def run_tab(system: lumped.System, system_key: str) -> None:
    state = st.session_state
    if not system.bodies:
        st.info("The system has no bodies to run.")
        return
    st.subheader("Run", anchor=False)
    stepper, dt, duration = _step_settings(with_rate=True)
    rate_text = state.get("run_rate") or ""
    rate, rate_error = (None, None)
    if rate_text.strip():
        rate, rate_error = choices.parse_positive(rate_text, "frequency", "output rate")
        if rate_error:
            st.error(_md(rate_error), icon=":material/error:")
    for note in state.get("setting_notes") or []:
        st.caption(f":material/info: {_md(note)}")
    check = _checked(system, system_key, stepper, dt, duration)
    ready = check is not None and not rate_error
    current_key = _settings_key(system_key, stepper, dt, duration, rate) if ready else None
    if check is not None:
        _verdict(check)
        for note in lumped.excitation.brief_inputs(system, dt):
            st.warning(_md(note), icon=":material/warning:")
        if state.get("run_anyway_for") != current_key:  # a tick holds for one setting only
            state.run_anyway, state.run_anyway_for = False, current_key
        if not check.stable:
            st.checkbox("Run anyway (the run is expected to diverge)", key="run_anyway")
        work = check.steps * len(system.bodies)
        if work > LONG_RUN_BODY_STEPS:
            st.warning(
                f"A long run: {check.steps:,} steps of {len(system.bodies):,} bodies. The page "
                "waits for it while the bar shows how far it is; a shorter duration keeps the "
                "page quick.",
                icon=":material/hourglass_top:",
            )
    allowed = ready and (check.stable or bool(state.get("run_anyway")))
    if st.button("Run", type="primary", key="run_button", disabled=not allowed,
                 icon=":material/play_arrow:"):  # fmt: skip
        if allowed:
            _start_run(system, system_key, stepper, dt, duration, rate)
    if ready and not allowed:
        st.caption("The run is refused while the step check says unstable.")
    error = state.get("run_error")
    if error and error["key"] == current_key:
        st.error(f"**The run could not start:** {_md(error['message'])}", icon=":material/error:")
    _results(system, system_key, current_key)
    st.divider()
    _road_section(system, system_key)
