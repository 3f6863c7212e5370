"""``twofold items``: generate, show, vary, audit and export banks."""

from __future__ import annotations

import json
from collections.abc import Mapping
from pathlib import Path
from typing import Annotated, Any

import typer

from ._console import console, progress, stdout

items_app = typer.Typer(help="Generate, inspect, vary and audit item banks.", no_args_is_help=True)


def register(app: typer.Typer) -> None:
    app.add_typer(items_app, name="items")
    from .items_export import register_items

    register_items(items_app)


@items_app.command("generate")
def generate(
    spec: Annotated[Path, typer.Argument(help="Generation spec (TOML) or a study.toml.")],
    out: Annotated[Path, typer.Option("-o", "--out", help="Bank folder to write.")],
    overwrite: Annotated[bool, typer.Option(help="Replace an existing bank folder.")] = False,
) -> None:
    """Generate a bank from a spec; same spec and seed give the same bank hash."""
    from twofold.study import generate_bank, load_spec, load_study, write_bank

    gen_spec = load_study(spec).generation_spec() if spec.name == "study.toml" else load_spec(spec)
    total = sum(fs.n for fs in gen_spec.families)
    with progress("generating items", total) as bar:
        bank = generate_bank(gen_spec, progress=lambda fam, k: bar.advance(k))
    bank = write_bank(bank, out, overwrite=overwrite)
    for fam, st in bank.meta["generation"].items():
        rej = sum(st["rejections"].values())
        console.print(
            f"{fam}: {st['parents']} items + {st['variants']} variants; {rej} candidates rejected"
        )
    stdout.print(f"wrote {len(bank)} items to {out} (bank hash {bank.hash[:16]}…)")


@items_app.command("show")
def show(
    bank_dir: Annotated[Path, typer.Argument(help="Bank folder.")],
    item_id: Annotated[str, typer.Argument(help="Item id, e.g. str-0123456789ab.")],
    as_: Annotated[str, typer.Option("--as", help="Medium: text, picture or structured.")] = "text",
    mode: Annotated[
        str | None, typer.Option(help="Response mode (default: the item's first).")
    ] = None,
    out: Annotated[Path | None, typer.Option("-o", "--out", help="Write to this file.")] = None,
    answer: Annotated[bool, typer.Option(help="Also print the answer (text only).")] = False,
) -> None:
    """Show one item as a text prompt, a picture (PNG/SVG) or structured JSON."""
    from twofold.study import load_bank, render, render_picture
    from twofold.study.checks import check_choice
    from twofold.study.item import canonical_json

    check_choice("--as", as_, ("text", "picture", "structured"))
    item = load_bank(bank_dir)[item_id]
    if as_ == "picture":
        fmt = "svg" if out is not None and out.suffix.lower() == ".svg" else "png"
        data = render_picture(item, mode, fmt=fmt)
        target = out or Path(f"{item.id}.png")
        target.write_bytes(data)
        stdout.print(f"wrote {target}")
        return
    view = render(item, as_, mode)
    text = view if isinstance(view, str) else json.dumps(view, indent=2, ensure_ascii=False)
    if answer and as_ == "text":
        text += f"\n\n[answer] {canonical_json(item.answer)}"
    if out is not None:
        out.write_text(text + "\n", encoding="utf-8")
        stdout.print(f"wrote {out}")
    else:
        stdout.print(text, markup=False)


@items_app.command("vary")
def vary(
    bank_dir: Annotated[Path, typer.Argument(help="Bank folder.")],
    operator: Annotated[str, typer.Option(help="Variant operator name.")],
    out: Annotated[Path, typer.Option("-o", "--out", help="New bank folder.")],
    family: Annotated[str | None, typer.Option(help="Only items of this family.")] = None,
    seed: Annotated[int, typer.Option(help="Seed for the operator's random choices.")] = 0,
) -> None:
    """Write a new bank holding the bank's items plus one isomorph of each by OPERATOR."""
    from twofold.study import write_bank
    from twofold.study.variants import vary_bank

    new, stats = vary_bank(bank_dir, operator, family=family, seed=seed)
    new = write_bank(new, out)
    console.print(
        f"{stats['made']} variants made, {stats['skipped']} items skipped (operator does not apply)"
    )
    stdout.print(f"wrote {len(new)} items to {out} (bank hash {new.hash[:16]}…)")


@items_app.command("audit")
def audit(
    bank_dir: Annotated[Path, typer.Argument(help="Bank folder.")],
    json_out: Annotated[
        Path | None, typer.Option("--json", help="Also write the audit as JSON.")
    ] = None,
    all_pictures: Annotated[
        bool, typer.Option(help="Draw every item as a picture (default: 6 per family).")
    ] = False,
) -> None:
    """Audit a bank: coverage, duplicates, answer uniqueness, rendering, shortcut leaks."""
    from twofold.study import load_bank
    from twofold.study.audit import audit_bank

    bank = load_bank(bank_dir)
    with progress("auditing", len(bank)) as bar:
        report = audit_bank(bank, progress=bar.advance, picture_sample=None if all_pictures else 6)
    print_audit(report, stdout)
    if json_out is not None:
        json_out.write_text(json.dumps(report, indent=2, default=str) + "\n", encoding="utf-8")
        console.print(f"wrote {json_out}")
    if report.get("flags"):
        raise typer.Exit(1)


# -- the audit on the terminal ---------------------------------------------------------------
def print_audit(report: Mapping[str, Any], console: Any) -> None:
    """Print an audit report (from :func:`twofold.study.audit.audit_bank`) on a rich ``Console``.

    Flagged findings, and shortcut rows significantly above chance, are printed in red.
    """
    from rich.markup import escape
    from rich.table import Table

    bh = str(report.get("bank_hash") or "")
    console.print(f"[bold]Bank audit[/bold]: {report['n_items']} items (bank hash {bh[:16]}…)")

    t = Table(title="Items per family")
    for col in ("family", "items", "parents", "variants", "modes", "distractor schemes"):
        t.add_column(col)
    for fam, f in report["families"].items():
        t.add_row(
            fam,
            str(f["n_items"]),
            str(f["n_parents"]),
            str(f["n_variants"]),
            _pairs(f["modes"]),
            _pairs(f["distractor_schemes"]) or "-",
        )
    console.print(t)

    t = Table(title="Items per factor level")
    for col in ("family", "factor", "levels (items)"):
        t.add_column(col)
    for fam, f in report["families"].items():
        for name, levels in f["factors"].items():
            t.add_row(fam, name, _pairs(levels))
    console.print(t)

    dup = report["duplicates"]
    n_dup = len(dup["same_content"]) + len(dup["same_stimulus_answer"])
    style = "red" if n_dup else "green"
    console.print(
        f"[{style}]Duplicates: {len(dup['same_content'])} groups with the same content, "
        f"{len(dup['same_stimulus_answer'])} with the same stimulus and answer[/{style}]"
    )
    uq = report["uniqueness"]
    style = "red" if uq else "green"
    console.print(f"[{style}]Answer uniqueness: {len(uq)} problems[/{style}]")
    rend = report["rendering"]
    ch = rend["checked"]
    note = (
        f" (pictures sampled: at most {rend['picture_sample_per_family']} items per family)"
        if rend["picture_sampled"]
        else " (pictures: every item)"
    )
    style = "red" if rend["failures"] else "green"
    console.print(
        f"[{style}]Rendering: {len(rend['failures'])} failures in {ch['text']} text, "
        f"{ch['structured']} structured, {ch['picture']} picture renders{note}[/{style}]"
    )

    if report["shortcuts"]:
        t = Table(title="Context-blind shortcut audit (choices only)")
        for col in (
            "family",
            "scheme",
            "choices",
            "items",
            "chance",
            "majority",
            "p",
            "centroid",
            "p ",
            "position-only",
            "verdict",
        ):
            t.add_column(col)
        for s in report["shortcuts"]:
            t.add_row(
                s["family"],
                s["distractor_scheme"],
                str(s["n_choices"]),
                str(s["n_items"]),
                f"{s['chance']:.1%}",
                f"{s['majority_accuracy']:.1%}",
                f"{s['majority_p']:.2g}",
                f"{s['centroid_accuracy']:.1%}",
                f"{s['centroid_p']:.2g}",
                f"{s.get('position_accuracy', float('nan')):.1%}",
                "LEAKS THE ANSWER" if s["flagged"] else "ok",
                style="bold red" if s["flagged"] else None,
            )
        console.print(t)
    else:
        console.print("Context-blind shortcut audit: no select-mode items.")

    if report.get("positions"):
        t = Table(title="Answer positions (select mode; position-only baseline = commonest share)")
        for col in ("family", "choices", "items", "answers per position", "commonest", "p", ""):
            t.add_column(col)
        for pr in report["positions"]:
            t.add_row(
                pr["family"],
                str(pr["n_choices"]),
                str(pr["n_items"]),
                " ".join(f"{k}:{c}" for k, c in enumerate(pr["counts"], start=1)),
                f"{pr['commonest_position']} ({pr['commonest_share']:.1%})",
                f"{pr['p_val']:.2g} ({pr['method']})",
                "UNBALANCED" if pr["flagged"] else "ok",
                style="bold red" if pr["flagged"] else None,
            )
        console.print(t)

    flags = report["flags"]
    if flags:
        console.print(f"[bold red]{len(flags)} flags:[/bold red]")
        for f in flags[:50]:
            console.print(f"[red]  {f['kind']}: {escape(f['message'])}[/red]")
        if len(flags) > 50:
            console.print(f"[red]  … and {len(flags) - 50} more (see --json)[/red]")
    else:
        console.print("[bold green]No flags.[/bold green]")


def _pairs(d: Mapping[str, Any]) -> str:
    return ", ".join(f"{k}: {v}" for k, v in d.items())
