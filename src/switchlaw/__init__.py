"""switchlaw: phenotype switching laws derived from information theory.

Cell-population modellers state what a cell senses and what each phenotype is worth; switchlaw
derives the switching law (maximum entropy or minimum information under a sensing budget or a
cost per bit, one Lagrange multiplier ``beta``) and what it does to the population.

Research software, not a medical device.

Public names are imported on first use (PEP 562), so ``import switchlaw`` and the command line
start quickly; ``switchlaw.__all__`` lists them all.
"""

from __future__ import annotations

import importlib as _importlib

__version__ = "0.1.0"

#: Public name -> the module that defines it, in pipeline order.
_EXPORTS = {
    # _errors
    "InfeasibleError": "._errors",
    "InputError": "._errors",
    # information
    "conditional_entropy": ".information",
    "entropy": ".information",
    "kl_divergence": ".information",
    "mutual_information": ".information",
    "NATS_PER_BIT": ".information",
    "to_bits": ".information",
    # decision
    "beta_from_cost": ".decision",
    "Capacity": ".decision",
    "capacity": ".decision",
    "cost_from_beta": ".decision",
    "CriticalBeta": ".decision",
    "first_critical_beta": ".decision",
    "LinearConstraint": ".decision",
    "max_information_bits": ".decision",
    "Policy": ".decision",
    "Sensitivity": ".decision",
    "sensitivity": ".decision",
    "solve": ".decision",
    "solve_budget": ".decision",
    "Tradeoff": ".decision",
    "tradeoff": ".decision",
    # laws
    "BINNING_RULES": ".laws",
    "continuous_signal": ".laws",
    "DensityDependent": ".laws",
    "derive_law": ".laws",
    "empirical": ".laws",
    "Environment": ".laws",
    "fit_formula": ".laws",
    "FormulaFit": ".laws",
    "GaussianReceptor": ".laws",
    "Hill": ".laws",
    "Linear": ".laws",
    "occupancy": ".laws",
    "PoissonReceptor": ".laws",
    "product_environment": ".laws",
    "SwitchingLaw": ".laws",
    "Threshold": ".laws",
    # population
    "BifurcationDiagram": ".population",
    "Branch": ".population",
    "CriticalPoint": ".population",
    "equilibria_of": ".population",
    "Equilibrium": ".population",
    "MeanField": ".population",
    "LawCache": ".population",
    "PARAMETERS": ".population",
    "RegimeMap": ".population",
    "REGIMES": ".population",
    "Trajectory": ".population",
    # spatial
    "front_study": ".spatial",
    "FrontRun": ".spatial",
    "FrontScan": ".spatial",
    "FrontStudy": ".spatial",
    "simulate_front": ".spatial",
    "spreading_speed": ".spatial",
    "SpreadingSpeed": ".spatial",
    # growth
    "bet_hedging": ".growth",
    "BetHedging": ".growth",
    "continuous_growth": ".growth",
    "cue_value": ".growth",
    "CueValue": ".growth",
    "generation_growth": ".growth",
    "growth_rate": ".growth",
    "GrowthEstimate": ".growth",
    "MarkovHabitat": ".growth",
    "optimal_switching": ".growth",
    "PeriodicHabitat": ".growth",
    "sensing_tradeoff": ".growth",
    "SensingTradeoff": ".growth",
    "switching_generator": ".growth",
    "SwitchingHabitat": ".growth",
    "SwitchingOptimum": ".growth",
    "symmetric_cue": ".growth",
    # stochastic
    "BirthDeathSwitching": ".stochastic",
    "BOUNDARIES": ".stochastic",
    "compare_mean_field": ".stochastic",
    "ENGINES": ".stochastic",
    "ExtinctionCurve": ".stochastic",
    "hitting_probability": ".stochastic",
    "HittingEstimate": ".stochastic",
    "Lattice": ".stochastic",
    "lattice_front": ".stochastic",
    "LatticeFront": ".stochastic",
    "LatticeModel": ".stochastic",
    "LatticeRun": ".stochastic",
    "MeanFieldComparison": ".stochastic",
    "NEIGHBOURHOODS": ".stochastic",
    "simulate_hitting": ".stochastic",
    "StochasticRun": ".stochastic",
    "wilson_interval": ".stochastic",
    # analysis
    "critical_sensitivity": ".analysis",
    "CheckpointWarning": ".analysis",
    "CriticalBetas": ".analysis",
    "CriticalSensitivity": ".analysis",
    "Design": ".analysis",
    "equilibrium_sensitivity": ".analysis",
    "EquilibriumSensitivity": ".analysis",
    "ExtinctionRisk": ".analysis",
    "FrontSummary": ".analysis",
    "latin_hypercube": ".analysis",
    "LawSummary": ".analysis",
    "load_scan": ".analysis",
    "Quantity": ".analysis",
    "RegimeSummary": ".analysis",
    "saltelli_design": ".analysis",
    "save_scan": ".analysis",
    "scan": ".analysis",
    "sobol_indices": ".analysis",
    "sobol_points": ".analysis",
    "SobolIndices": ".analysis",
    # calibration
    "calibrate": ".calibration",
    "Calibration": ".calibration",
    "population_verdict": ".calibration",
    "PopulationVerdict": ".calibration",
    "Snapshot": ".calibration",
    # study files from Python (the command line's pipeline)
    "demo_study": ".cli._api",
    "load_study": ".cli._api",
    "StudyFile": ".cli._api",
    "StudyResults": ".cli._api",
    # exporters
    "EXPORT_FORMATS": ".exporters",
    "Exported": ".exporters",
    "export": ".exporters",
    "read_table": ".exporters",
    # plotting
    "plot_bifurcation": ".plotting",
    "plot_front_position": ".plotting",
    "plot_front_profiles": ".plotting",
    "plot_front_speeds": ".plotting",
    "plot_calibration": ".plotting",
    "plot_law": ".plotting",
    "plot_profiles": ".plotting",
    "plot_regime_map": ".plotting",
    "plot_tradeoff": ".plotting",
}

__all__ = sorted(_EXPORTS)

#: Old public name -> its new name, kept for one release with a DeprecationWarning.
_RENAMED = {
    "MarkovEnvironment": "MarkovHabitat",
    "PeriodicEnvironment": "PeriodicHabitat",
    "SwitchingEnvironment": "SwitchingHabitat",
}


def __getattr__(name: str):
    if name in _RENAMED:
        import warnings

        warnings.warn(f"`switchlaw.{name}` is deprecated since 0.2; use `switchlaw.{_RENAMED[name]}`",
                      DeprecationWarning, stacklevel=2)
        return __getattr__(_RENAMED[name])
    try:
        module = _EXPORTS[name]
    except KeyError:
        raise AttributeError(f"module 'switchlaw' has no attribute {name!r}") from None
    value = getattr(_importlib.import_module(module, __name__), name)
    globals()[name] = value
    return value


def __dir__():
    """The public names and the module's dunders (not its imports or private helpers)."""
    return sorted(set(__all__) | {name for name in globals() if name.startswith("__") and name.endswith("__")})
