"""climbopt: minimum-time and minimum-fuel climb schedules.

Engineering estimate, not for operational use: the approved flight manual, the operator's
procedures and local regulations govern.
"""

__version__ = "0.1.0"

CAUTION = (
    "Engineering estimate, not for operational use. The approved flight manual, the operator's "
    "procedures and local regulations govern."
)

#: Environment variable naming climbopt's cache folder (compiled point functions, pint's parsed
#: unit definitions); default ``$XDG_CACHE_HOME/climbopt`` or ``~/.cache/climbopt``.
CACHE_ENV = "CLIMBOPT_CACHE_DIR"


def cache_dir():
    """Folder of climbopt's cached artefacts (:data:`CACHE_ENV`, else the user cache)."""
    import os
    from pathlib import Path

    if os.environ.get(CACHE_ENV):
        return Path(os.environ[CACHE_ENV])
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "climbopt"


#: The public API, one name per step of the data flow (scenario -> model -> energy -> solvers ->
#: results/verify -> report/plots). Loaded on first use so that ``import climbopt`` stays fast
#: (CasADi and matplotlib are imported only when a name that needs them is used).
_PUBLIC = {
    "load_scenario": "climbopt.scenario",
    "ScenarioError": "climbopt.scenario",
    "Scenario": "climbopt.scenario",
    "standard_atmosphere": "climbopt.atmosphere",
    "build_model": "climbopt.aircraft",
    "EnergyMap": "climbopt.energy",
    "build_energy_map": "climbopt.energy",
    "solve_energy_state": "climbopt.rutowski",
    "InfeasibleMission": "climbopt.rutowski",
    "solve_collocation": "climbopt.collocation",
    "SolverFailure": "climbopt.collocation",
    "resimulate": "climbopt.verify",
    "Trajectory": "climbopt.results",
    "Zoom": "climbopt.results",
    "fly_schedule": "climbopt.procedure",
    "best_schedule": "climbopt.procedure",
    "ScheduleNotFlyable": "climbopt.procedure",
    "climb_schedule": "climbopt.schedule",
    "crossover_altitude_m": "climbopt.schedule",
    "format_schedule": "climbopt.schedule",
    "comparison": "climbopt.report",
    "format_table": "climbopt.report",
    "plot_ps_map": "climbopt.plots",
    "plot_fs_map": "climbopt.plots",
    "plot_time_histories": "climbopt.plots",
}

__all__ = ["CAUTION", "__version__", *_PUBLIC]


def __getattr__(name):  # PEP 562: lazy public API
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'climbopt' has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_PUBLIC))
