"""The ``porecast`` command line.

Sub-commands are thin: they parse arguments, call the science package or the
service layer, show a progress bar and report errors as one plain message with
a non-zero exit status, leaving no partial output behind.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Sequence
from pathlib import Path

from tqdm import tqdm

from . import __version__

Handler = Callable[[argparse.Namespace], int]


class ProgressBar:
    """``progress(done, total, stage)`` callback drawing a tqdm bar on stderr."""

    def __init__(self, desc: str, enabled: bool = True):
        self.bar: tqdm | None = None
        self.desc = desc
        self.enabled = enabled

    def __call__(self, done: int, total: int, stage: str) -> None:
        if not self.enabled:
            return
        if self.bar is None:
            self.bar = tqdm(
                total=total,
                desc=self.desc,
                unit="step",
                file=sys.stderr,
                leave=True,
                dynamic_ncols=True,
            )
        self.bar.set_postfix_str(stage, refresh=False)
        self.bar.update(done - self.bar.n)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def _cmd_simulate(args: argparse.Namespace) -> int:
    from .services.simulation import run_simulation

    bar = ProgressBar("simulate", enabled=not args.quiet)
    try:
        summary = run_simulation(
            args.scenario, Path(args.out), realisations=args.realisations, progress=bar
        )
    finally:
        bar.close()
    if not args.quiet:
        print(f"scenario  {summary['scenario']['name']}")
        print(
            f"nodes     {summary['n_nodes']}  facies {len(summary['facies'])}  "
            f"realisations per facies per node {summary['realisations']}"
        )
        print(f"wrote     {args.out}/samples.npz, {args.out}/summary.json")
        for line in summary["overview"]:
            print(f"  {line}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of every sub-command."""
    parser = argparse.ArgumentParser(
        prog="porecast",
        description="Burial-aware scenario modelling and seismic facies classification. "
        "Outputs are screening estimates; pressure and temperature are not for well design, "
        "drilling or well control.",
    )
    parser.add_argument("--version", action="version", version=f"porecast {__version__}")
    sub = parser.add_subparsers(dest="command", required=True)

    sim = sub.add_parser("simulate", help="Monte Carlo training data of a scenario")
    sim.add_argument(
        "scenario",
        nargs="?",
        default=None,
        help="scenario JSON file (default: the bundled example scenario)",
    )
    sim.add_argument("--out", default="porecast-out", help="output folder (default %(default)s)")
    sim.add_argument(
        "--realisations",
        type=int,
        default=None,
        help="realisations per facies per node (default: the scenario's)",
    )
    sim.add_argument("--quiet", action="store_true", help="no progress bar or report")
    sim.set_defaults(handler=_cmd_simulate)

    for register in _extra_commands():
        register(sub)
    return parser


def _extra_commands() -> list[Callable[[argparse._SubParsersAction], None]]:
    """Sub-commands defined next to the layer they drive."""
    from .cli_analysis import add_analysis_commands
    from .cli_demo import add_demo_commands
    from .cli_service import add_service_commands

    return [add_analysis_commands, add_service_commands, add_demo_commands]


def small_pages_for_large_arrays() -> bool:
    """Stop numpy asking the kernel for transparent huge pages for its large arrays.

    numpy calls madvise(MADV_HUGEPAGE) on every array of 4 MiB or more. Where the
    kernel's THP defrag setting is "madvise" (the Debian default), each first touch
    of such memory may compact memory synchronously. Measured on the 2-core CI
    machine: the first fill of 280 MB of fresh arrays took 0.59-0.78 s with the
    advice and 0.14-0.18 s without; a one-shot ``porecast simulate`` of 10^6
    realisations 1.8-2.0 s CPU with it, 1.4-1.5 s without; later runs in one process
    reuse memory and are the same either way. Returns whether the switch exists
    (a private numpy function; without it nothing changes).
    """
    try:
        from numpy._core.multiarray import _set_madvise_hugepage
    except ImportError:  # pragma: no cover - numpy < 2
        try:
            from numpy.core.multiarray import _set_madvise_hugepage
        except ImportError:
            return False
    _set_madvise_hugepage(False)
    return True


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``porecast`` console script."""
    small_pages_for_large_arrays()
    parser = build_parser()
    args = parser.parse_args(argv)
    handler: Handler = args.handler
    try:
        return handler(args)
    except (ValueError, FileNotFoundError, PermissionError) as exc:
        print(f"porecast {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"porecast {args.command}: interrupted; no output written", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
