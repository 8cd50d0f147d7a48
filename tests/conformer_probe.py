"""Drive one conformer through the pipeline's vibration step by hand (tests only).

``_vibrate`` keeps the call shape these tests were written against: it runs
:func:`cationcalc.compute.pipeline.vibrate` on a :class:`~cationcalc.compute.pipeline.SpeciesJob`
and copies the new conformer, the warnings and the engine calls into the objects the test holds.
"""

from dataclasses import fields

from cationcalc.compute.pipeline import SpeciesJob, vibrate


def _vibrate(conf, numbers, sp, settings, engine, reference_bonds, warnings, counts) -> None:
    outcome = vibrate(SpeciesJob(sp, settings, engine, list(numbers), reference_bonds), conf)
    for field in fields(conf):
        setattr(conf, field.name, getattr(outcome.conformer, field.name))
    warnings.extend(outcome.warnings)
    counts["hessian"] += outcome.hessian_calls
    counts["optimization"] += outcome.optimization_calls
