"""One-call library entry point: read inputs, run the plan, write the outputs."""

from __future__ import annotations

from pathlib import Path

from courseplan.settings import PlanSettings


def plan(settings: PlanSettings | str | Path, out_dir: str | Path, *, overwrite: bool = False, progress=None):
    """Run a whole plan and write its outputs into *out_dir*.

    Parameters
    ----------
    settings
        Validated settings, or the path of a plan file.
    out_dir
        Output folder (must not exist unless *overwrite*).
    overwrite
        Replace an existing output folder (only once the new outputs are complete).
    progress
        Optional callable ``progress(stage_name)``.

    Returns
    -------
    PlanResult
        The result that was written.
    """
    from courseplan.io.files import refuse_existing
    from courseplan.io.loader import load_inputs
    from courseplan.io.outputs import write_outputs
    from courseplan.io.planfile import read_plan
    from courseplan.pipeline import run_plan

    if not isinstance(settings, PlanSettings):
        settings = read_plan(settings)
    out = Path(out_dir)
    refuse_existing(out, overwrite, kind="folder")
    inputs = load_inputs(settings)
    result = run_plan(settings, inputs, progress=progress)
    write_outputs(result, out, overwrite=overwrite)
    return result


def check(settings: PlanSettings):
    """Read every input and dry-run the stages, writing nothing.

    Returns
    -------
    tuple
        (notes from reading the inputs, the :class:`~courseplan.pipeline.PlanResult`).
    """
    from courseplan.io.loader import load_inputs
    from courseplan.pipeline import run_plan

    inputs = load_inputs(settings, collect=True)
    # a dry run of the stages catches what only the data can tell (coverage, encodings, classes)
    return tuple(inputs.notes), run_plan(settings, inputs)
