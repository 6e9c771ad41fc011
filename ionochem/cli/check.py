"""``ionochem check``: validate a reaction list and summarise it (no scenario needed)."""

from __future__ import annotations

import sys

from ionochem.errors import InputError


def register(subparsers):
    c = subparsers.add_parser("check", help="validate a reaction list and summarise it")
    c.add_argument("file")
    c.add_argument("--strict", action="store_true",
                   help="require a ref and an uncertainty factor for every reaction")
    c.set_defaults(func=cmd_check)


def plural(n, word, many=None):
    """``1 family``, ``2 families``."""
    return f"{n} {word if n == 1 else (many or word + 's')}"


def cmd_check(args):
    from ionochem.environment.neutrals import NEUTRAL_SPECIES
    from ionochem.mechanism.mechanism import Mechanism
    from ionochem.mechanism.parser import parse_reaction_list
    rl = parse_reaction_list(args.file)
    if not rl.reactions:
        raise InputError("the reaction list holds no reactions", file=args.file)
    present = []
    for r in rl.reactions:
        for sp, _ in (*r.reactants, *r.products):
            if sp.name not in present:
                present.append(sp.name)
    fixed = [s for s in present if s in NEUTRAL_SPECIES]
    mech = Mechanism(rl, fixed=fixed)
    if not mech.solved:
        raise InputError("the reaction list has no species to solve (every species is a "
                         "fixed neutral)", file=args.file)
    problems = []
    if args.strict:
        for r in rl.reactions:
            if not r.ref:
                problems.append(InputError(f"reaction {r.id} has no ref (required by --strict)",
                                           file=r.file, line=r.line))
            if r.f is None and rl.default_f is None:
                problems.append(InputError(f"reaction {r.id} has no uncertainty factor f and "
                                           "there is no @default f (required by --strict)",
                                           file=r.file, line=r.line))
    # The parser already warns of species produced but never lost (fixed neutrals are
    # fine; anything else is refused by `run` unless the neutral source fixes it).
    fams = (f" ({plural(len(rl.families), 'family', 'families')} expanded)"
            if rl.families else "")
    print(f"{args.file}: {plural(len(rl.reactions), 'reaction')}{fams}")
    print(f"  solved    : {', '.join(mech.solved)}")
    print(f"  fixed     : {', '.join(fixed) or '-'}  (neutrals; the scenario's neutral source "
          "decides)")
    print(f"  electrons : {'e from charge neutrality' if mech.algebraic else '-'}")
    for tot in mech.derived:
        print(f"  derived   : {tot.name} = {' + '.join(tot.members)}")
    for fam, members in rl.families.items():
        print(f"  family    : {fam} -> {', '.join(members)}")
    for tie in getattr(rl, "ties", ()):
        print(f"  unit      : {tie.name} = {', '.join(tie.members)}  (analysed as one "
              "process)")
    for w in rl.warnings:
        print(f"warning: {w}", file=sys.stderr)
    if problems:
        for p in problems[1:]:
            print(str(p), file=sys.stderr)
        raise problems[0]
    return 0
