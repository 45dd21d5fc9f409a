"""The `frontwatch simulate` command: write a labelled scenario of the invented Sallowmere coast."""

from __future__ import annotations

from pathlib import Path

import typer


def register(app: typer.Typer) -> None:
    @app.command("simulate")
    def simulate(
        out: Path = typer.Option(..., "--out", help="Directory to write network.toml, observations.csv, "
                                 "labels.jsonl, fronts.jsonl, faults.jsonl, nuisances.jsonl, scenario.json."),
        preset: str = typer.Option("ordinary", help="ordinary, noisy, noisy_sensors, smeared, south, curved or bench."),
        seed: int | None = typer.Option(None, help="Random seed (the same seed gives the same files)."),
        days: int | None = typer.Option(None, min=1, help="Number of days."),
        stations: int | None = typer.Option(None, min=1, help="Number of stations."),
        plan: str | None = typer.Option(None, help="Comma-separated day kinds, cycled, e.g. "
                                        "'breeze,breeze_stall+land_breeze,cold_front,breeze+gust_front'."),
        noise_scale: float | None = typer.Option(None, min=0.0, help="Sensor noise (and turbulence, unless "
                                                 "--turbulence-scale), 1 = ordinary."),
        turbulence_scale: float | None = typer.Option(None, min=0.0, help="The air's turbulence and wander apart "
                                                      "from the sensors' noise, 1 = ordinary."),
        weak_inland: bool | None = typer.Option(None, "--weak-inland/--strong-inland",
                                                help="Breeze signatures fade quickly inland."),
        smeared_fraction: float | None = typer.Option(None, min=0.0, max=1.0,
                                                      help="Share of stations reporting a 10-min running-mean wind."),
        averaging_key: bool = typer.Option(True, "--averaging-key/--no-averaging-key",
                                           help="Declare wind_averaging_min for smeared stations (off: blind test)."),
        hemisphere: str | None = typer.Option(None, help="north or south."),
        shore: str | None = typer.Option(None, help="straight or bay (curved shore)."),
        start_date: str | None = typer.Option(None, help="Local date of the first day, YYYY-MM-DD."),
        fault_rate: float | None = typer.Option(None, min=0.0, help="Sensor fault rate, 0 = none, 1 = ordinary."),
    ) -> None:
        """Generate a labelled scenario (invented setting) for demos, tests and scoring."""
        import time

        from ..sim import generate
        from ..sim import preset as make_spec

        t0 = time.perf_counter()
        try:
            spec = make_spec(
                preset, seed=seed, days=days, stations=stations,
                plan=tuple(p.strip() for p in plan.split(",") if p.strip()) if plan else None,
                noise_scale=noise_scale, turbulence_scale=turbulence_scale, weak_inland=weak_inland, smeared_fraction=smeared_fraction,
                declare_averaging=None if averaging_key else False, hemisphere=hemisphere, shore=shore,
                start_date=start_date, fault_rate=fault_rate)
            scenario = generate(spec)
        except ValueError as exc:
            typer.echo(f"simulate: {exc}", err=True)
            raise typer.Exit(2) from None
        try:
            paths = scenario.write(out)
        except OSError as exc:
            typer.echo(f"simulate: cannot write to {out}: {exc.strerror or exc}", err=True)
            raise typer.Exit(1) from None
        kinds: dict[str, int] = {}
        for lab in scenario.labels:
            kinds[lab["kind"]] = kinds.get(lab["kind"], 0) + 1
        typer.echo(f"wrote {len(scenario.observations)} records of {len(scenario.setting.stations)} stations "
                   f"over {spec.days} days to {paths['observations.csv'].parent} "
                   f"in {time.perf_counter() - t0:.1f} s")
        typer.echo("days: " + ", ".join(d["kind"] for d in scenario.days))
        typer.echo("labels: " + (", ".join(f"{k} {v}" for k, v in sorted(kinds.items())) or "none")
                   + f"; breeze fronts {len(scenario.fronts)}; faults {len(scenario.faults)}")
