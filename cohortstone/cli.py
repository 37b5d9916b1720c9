"""Command line: `cohortstone run CONFIG [--out DIR]`, `cohortstone check CONFIG` and
`cohortstone fetch --cycles ... [--components ...] DIR`.

User errors print one paragraph and exit with code 2; `--debug` shows the traceback.
"""
from __future__ import annotations

import argparse
import sys
import warnings

from cohortstone import __version__
from cohortstone.errors import CohortstoneError


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="cohortstone",
        description="Design-correct analyses of kidney-stone surveys and cohorts from one YAML file.")
    parser.add_argument("--version", action="version", version=f"cohortstone {__version__}")
    commands = parser.add_subparsers(dest="command", required=True)
    run = commands.add_parser("run", help="run the whole analysis and write the report folder")
    run.add_argument("config", help="the study's YAML file")
    run.add_argument("--out", help="output folder (default: the config's `output`, or reports)")
    run.add_argument("--compare", metavar="PREVIOUS_REPORT_DIR",
                     help="also list what changed since an earlier run's report folder")
    run.add_argument("--debug", action="store_true", help="show a traceback on errors")
    check = commands.add_parser("check", help="validate config and data without fitting")
    check.add_argument("config", help="the study's YAML file")
    check.add_argument("--debug", action="store_true", help="show a traceback on errors")
    _fetch_parser(commands)
    return parser


def _fetch_parser(commands) -> None:
    """`fetch`: download the national survey's public files (cohortstone/fetch.py)."""
    from cohortstone.fetch import BASE
    from cohortstone.sources.nhanes.cycles import COMPONENTS, CYCLES
    fetch = commands.add_parser("fetch", help="download the national survey's public .XPT "
                                "files into a folder (resumable; keeps a checksum list)")
    fetch.add_argument("folder", help="where the files go (created if missing)")
    fetch.add_argument("--cycles", action="append", metavar="LIST",
                       help=f"comma-separated cycles: {', '.join(CYCLES)}")
    fetch.add_argument("--components", action="append", metavar="LIST",
                       help=f"comma-separated (default: all): {', '.join(COMPONENTS)}")
    fetch.add_argument("--base", default=BASE, help=f"download address (default: {BASE}); "
                       "files are read from <base>/<first year>/DataFiles/<FILE>.xpt, or give a "
                       "template with {file} (and {year} or {cycle})")
    fetch.add_argument("--refresh", action="store_true",
                       help="download files already present again (replaced only when complete)")
    fetch.add_argument("--debug", action="store_true", help="show a traceback on errors")


def main(argv: list[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    from cohortstone import pipeline
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("default")
            if args.command == "check":
                print(pipeline.check(args.config))
                return 0
            if args.command == "fetch":
                from pathlib import Path

                from cohortstone.fetch import fetch
                for line in fetch(Path(args.folder), args.cycles, args.components,
                                  base=args.base, refresh=args.refresh):
                    print(line)
                return 0
            results = pipeline.run(args.config, out=args.out, compare=args.compare)
    except CohortstoneError as exc:
        if args.debug:
            raise
        print(f"cohortstone: error: {exc.describe()}", file=sys.stderr)
        return 2
    written = sorted(p.name for p in results.output_dir.iterdir())
    print(f"wrote {results.output_dir}/ ({', '.join(written)})")
    if results.odds_ratios is not None:
        table = results.odds_ratios
        for model in table.loc[table["flag"].fillna("") != "", "model"].unique():
            print(f"note: model `{model}` was not estimated; see the flag column.",
                  file=sys.stderr)
    for note in results.manifest.get("notes", []):
        print(f"note: {note}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
