"""Command line: ``invdesign COMMAND key=value ...`` — a thin layer of Hydra apps over the library.

Commands read their defaults from ``conf/COMMAND.yaml`` (the project's ``conf/`` folder, or the folder
given by the environment variable INVDESIGN_CONF). Any key can be overridden as ``key=value``; Hydra's
own flags (``--cfg job``, ``-m`` for sweeps) work too. A user's mistake ends with one clear message and
exit status 2, never a traceback.
"""

import os
import pathlib
import sys

_COMMANDS = {
    "simulate": "spectra of a design file: spectra.csv, spectra.json, spectra.png",
    "optimize": "a verified cell for a spec and a fab deck: design.json, metrics.json, plots",
    "export": "GDSII and OASIS layout of a design plus a fab traveller: layout.gds, layout.oas, traveller.md",
    "tradeoff": "a fab-checked Pareto front of 2-4 objectives: front.csv, front.json, front.png",
    "gather": "one table and plot of a sweep's runs (sweep=DIR): summary.csv, summary.png",
    "tolerance": "Monte Carlo yield of a design under the fab deck's errors: tolerance.json, plots",
    "verify": "fast model vs the volume-discretised solver, goal by goal: verify.md, verify.json, plot",
}


def _conf_dir() -> pathlib.Path:
    env = os.environ.get("INVDESIGN_CONF")
    if env:
        return pathlib.Path(env).resolve()
    return (pathlib.Path(__file__).resolve().parent.parent / "conf").resolve()


def _usage() -> str:
    lines = ["usage: invdesign COMMAND [key=value ...]", "", "commands:"]
    lines += [f"  {name:<10} {text}" for name, text in _COMMANDS.items()]
    lines += ["", "Show a command's settings: invdesign COMMAND --cfg job"]
    return "\n".join(lines)


def _fail(message: str) -> None:
    print(f"invdesign: error: {message}", file=sys.stderr)
    sys.exit(2)


def main() -> None:
    argv = sys.argv[1:]
    if not argv or argv[0] in ("-h", "--help", "help"):
        print(_usage())
        return
    cmd = argv[0]
    if cmd not in _COMMANDS:
        _fail(f"unknown command '{cmd}'.\n{_usage()}")
    conf = _conf_dir()
    if not (conf / f"{cmd}.yaml").is_file():
        _fail(f"configuration '{conf / (cmd + '.yaml')}' not found; run from an invdesign checkout "
              f"installed with 'pip install -e .', or set INVDESIGN_CONF to its conf/ folder")
    import hydra

    from . import _commands

    task = getattr(_commands, cmd)

    def runner(cfg):
        from ._errors import InvdesignError

        try:
            return task(cfg)
        except InvdesignError as err:
            _fail(str(err))

    sys.argv = [f"invdesign-{cmd}"] + argv[1:]
    hydra.main(config_path=str(conf), config_name=cmd, version_base="1.3")(runner)()


if __name__ == "__main__":
    main()
