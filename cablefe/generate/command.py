"""The ``cablefe new`` command: its argument parser, built from the registry, and its action.

Kept beside the generators so that the shared command-line module only adds
the subcommand and dispatches to :func:`run`.
"""
from __future__ import annotations

import argparse
from pathlib import Path

from . import families, generate

NEW_HELP = "write a complete, commented case file for a parametric layout"


def _overview() -> str:
    lines = ["families and their parameters (bare numbers in m and kN; any unit may be given):"]
    for fam in families().values():
        lines.append(f"\n{fam.name}: {fam.summary}")
        lines += [f"  {p.option} {p.default_text()}" + (f"  ({'|'.join(p.choices)})" if p.choices else "")
                  for p in fam.params]
    lines.append("\nexamples:")
    for fam in families().values():
        lines.append(f"  {fam.examples[0]}")
    lines.append('  cablefe new suspension --span "80 m" --sag "8 m" --tower-height "14 m" -o bridge.toml')
    lines.append("  cablefe new suspension --help      # the parameters of one family, explained")
    lines.append("\nThe numbers written are placeholders to be checked by a licensed engineer.")
    return "\n".join(lines)


def add_parser(sub, parser_class) -> None:
    """Add ``new`` with one sub-command per family to an argparse sub-parser set."""
    new = sub.add_parser("new", help=NEW_HELP, description=NEW_HELP + ": the geometry is drawn near its "
                         "equilibrium under the permanent loads, with load cases, combinations and a "
                         "[shape] table for form-finding.", epilog=_overview(),
                         formatter_class=argparse.RawDescriptionHelpFormatter)
    kinds = new.add_subparsers(dest="family", required=True, parser_class=parser_class, metavar="FAMILY")
    for fam in families().values():
        f = kinds.add_parser(fam.name, help=fam.summary, description=f"{fam.summary}. {fam.notes}",
                             epilog="examples:\n" + "\n".join(f"  {e}" for e in fam.examples)
                             + "\n\nValues may carry units (\"80 m\", \"80000 mm\", \"4.5 kN/m\"); bare "
                             "numbers are in m and kN.\nThe numbers written are placeholders to be "
                             "checked by a licensed engineer.",
                             formatter_class=argparse.RawDescriptionHelpFormatter)
        f.add_argument("-o", "--output", required=True, metavar="CASE.toml", help="case file to write")
        f.add_argument("--force", action="store_true", help="overwrite CASE.toml if it exists")
        for p in fam.params:
            f.add_argument(p.option, dest=f"param_{p.name}", metavar="VALUE" if not p.choices else
                           "{" + ",".join(p.choices) + "}",
                           help=f"{p.help} (default: {p.default_text()})")


def run(args) -> int:
    """Write the case; ValueError (bad parameter) is reported by the caller with exit 2."""
    from ..io.atomic import write_text

    given = {k[len("param_"):]: v for k, v in vars(args).items() if k.startswith("param_") and v is not None}
    text = generate(args.family, given)
    out = Path(args.output)
    if out.exists() and not args.force:
        raise ValueError(f"{out}: exists; use --force to overwrite it")
    write_text(out, text)
    print(f"wrote {out} ({args.family} layout, {text.count('[[members]]')} members)")
    print(f"next: cablefe check {out}   then   cablefe run {out} -o OUT")
    print("caution: the numbers are placeholders; results must be checked by a licensed engineer")
    return 0

