"""``twofold items``: generate, show, vary, audit and export banks."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated

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
    from twofold.study._check import check_choice
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
    from twofold.study.audit import audit_bank, print_audit

    bank = load_bank(bank_dir)
    with progress("auditing", len(bank)) as bar:
        report = audit_bank(bank, progress=bar.advance, picture_sample=None if all_pictures else 6)
    print_audit(report, stdout)
    if json_out is not None:
        json_out.write_text(json.dumps(report, indent=2, default=str) + "\n", encoding="utf-8")
        console.print(f"wrote {json_out}")
    if report.get("flags"):
        raise typer.Exit(1)
