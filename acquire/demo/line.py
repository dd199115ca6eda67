"""The patch line's morning: plans pointed at the simulator, a guided calibration with a
wrong standard caught, three units measured against the mask, and one plot."""

from __future__ import annotations

from acquire.demo.context import DemoContext, demo_plan


def step_plans(ctx: DemoContext) -> None:
    demo_plan(ctx, "patch-line-a", ctx.sim.tcp_resource)  # its checks as shipped
    demo_plan(ctx, "whip-915", ctx.sim.serial_resource)
    print(f"  plans written to {ctx.root / 'plans'}")


def step_calibrate(ctx: DemoContext) -> None:
    """A scripted technician who first connects the wrong standard, then gets it right."""
    plan = ctx.plans["patch-line-a"]
    out = ctx.root / "results" / "patch-line-a"
    print("  (the scripted technician connects a SHORT where the OPEN belongs, "
          "then follows the prompts)")
    ctx.sweepd("calibrate", str(plan), "--prompt", "scripted",
               "--script", "short,short,open,load", "--ascii")
    ctx.fixture("connect", what="device")
    ctx.produced.append(("cal sets", out / "cal"))


def step_measure(ctx: DemoContext) -> None:
    plan = ctx.plans["patch-line-a"]
    out = ctx.root / "results" / "patch-line-a"
    for serial in ("PA-0001", "PA-0002", "PA-0003"):
        ctx.fixture("unit", serial=serial)
        ctx.sweepd("run", str(plan), "--serial", serial, "--output", str(out))
    ctx.produced.append(("patch line captures", out))


def step_plot(ctx: DemoContext) -> None:
    out = ctx.root / "results" / "patch-line-a"
    captures = sorted(out.glob("*.s1p"))
    if not captures:
        return
    png = ctx.root / "plots" / f"{captures[0].stem}.png"
    png.parent.mkdir(parents=True, exist_ok=True)
    ctx.sweepd("plot", str(captures[0]), "--mask", "patch-2g45", "-o", str(png))
    ctx.produced.append(("plots", png.parent))
