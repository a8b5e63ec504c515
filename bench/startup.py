"""Time from launch to the first painted plan on the demo heat, headless (issue 4: target < 1.5 s).

Each run is a fresh Python process, as a user's `meltfix` would be: interpreter start, imports,
reading the recipe book and the demo heat, building the screen, the first solve in its worker,
and the frame that shows the plan. The child reports the wall-clock moment the plan is painted;
the parent measures from just before it started the process.

    /tmp/venv/bin/python bench/startup.py [--runs 5]
"""

from __future__ import annotations

import argparse
import asyncio
import os
import resource
import statistics
import subprocess
import sys
import time

TARGET_S = 1.5


async def _child() -> None:
    import argparse as _argparse

    from meltfix.commands.screen import build_app
    from meltfix.tui.widgets.plan_view import PlanView

    imported = time.time()
    app = build_app(_argparse.Namespace(heat=None, recipes=None, logbook=None, tickets=None, light=False))
    async with app.run_test(size=(100, 32)) as pilot:
        while not (app.screen.query(PlanView) and app.screen.query_one(PlanView).is_current):
            await asyncio.sleep(0.002)
        await pilot.pause()  # the refresh that paints it
        painted = time.time()
        heavy = sorted(name for name in ("pandas", "matplotlib") if name in sys.modules)
    print(f"{imported!r} {painted!r} {','.join(heavy) or '-'}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=5)
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        asyncio.run(_child())
        return
    totals, imports, cpu = [], [], []
    heavy = "-"
    for _ in range(args.runs):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        started = time.time()
        out = subprocess.run([sys.executable, __file__, "--child"], capture_output=True, text=True, check=True)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        imported, painted, heavy = out.stdout.split()
        totals.append(float(painted) - started)
        imports.append(float(imported) - started)
        # CPU seconds of the whole child (to its exit): a figure that a busy machine disturbs less.
        cpu.append(after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime)
    print(f"launch -> first painted plan, demo heat, headless, {args.runs} runs")
    print(f"  median {statistics.median(totals):.3f} s   best {min(totals):.3f} s   worst {max(totals):.3f} s"
          f"   (target < {TARGET_S} s: {'met' if statistics.median(totals) < TARGET_S else 'NOT met'})")
    print(f"  of which interpreter start + screen imports: median {statistics.median(imports):.3f} s")
    print(f"  CPU time of the whole child process: median {statistics.median(cpu):.3f} s")
    print(f"  heavy modules loaded on the way: {heavy}   (load average now {os.getloadavg()[0]:.1f} "
          f"on {os.cpu_count()} CPUs: other work slows the wall-clock figures)")


if __name__ == "__main__":
    main()
