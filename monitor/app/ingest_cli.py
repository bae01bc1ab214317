"""``bloomline ingest PATH|URL --feed NAME``: a one-off load with a progress bar and a summary.

PATH may be a file or a folder (every file in it matching the feed's
pattern); URL (http:// or https://) is fetched once with the feed's
timeout. The command prints one line per batch and the totals, and exits
with status 1 when a batch failed or rejected every row.
"""

from __future__ import annotations

from pathlib import Path

import click

from monitor.config import ConfigError, load_config


def _files(path: Path, pattern: str) -> list[Path]:
    if path.is_dir():
        return sorted(p for p in path.glob(pattern) if p.is_file() and not p.name.startswith("."))
    return [path]


@click.command("ingest")
@click.argument("target")
@click.option("--feed", "feed_name", required=True, help="Name of the [[feeds]] entry that says how to read TARGET.")
@click.option("--config", "config_path", envvar="BLOOMLINE_CONFIG", type=click.Path(dir_okay=False),
              default="bloomline.toml", show_default=True, help="The Bloomline TOML (or $BLOOMLINE_CONFIG).")
def ingest(target: str, feed_name: str, config_path: str | None) -> None:
    """Load PATH (a file or folder) or URL into the store as the feed NAME describes."""
    from monitor.ingest.batches import BatchResult, ingest_bytes
    from monitor.ingest.feeds.csv_folder import ingest_path
    from monitor.store.db import open_store

    path = config_path
    try:
        config = load_config(path)
        feed = config.feed(feed_name)
    except ConfigError as exc:
        raise click.ClickException(str(exc)) from None
    except KeyError:
        raise click.ClickException(f"no feed named {feed_name!r} in {path}") from None
    engine = open_store(config.service.database_url)
    results: list[BatchResult] = []
    if target.startswith(("http://", "https://")):
        from monitor.ingest.feeds.http_pull import fetch

        try:
            response = fetch(target, timeout_s=feed.timeout_s)
        except Exception as exc:  # network trouble is the user's answer here, not a traceback
            raise click.ClickException(f"could not fetch {target}: {exc}") from None
        results.append(ingest_bytes(engine, config, feed, response.body, target))
    else:
        files = _files(Path(target), feed.pattern)
        if not files or not files[0].exists():
            raise click.ClickException(f"no file at {target}" if not Path(target).is_dir()
                                       else f"no file matching {feed.pattern!r} in {target}")
        with click.progressbar(files, label=f"ingest {feed.name}", show_pos=True,
                               item_show_func=lambda p: p.name if p else "") as bar:
            for file in bar:
                results.append(ingest_path(engine, config, feed, file))
    for r in results:
        click.echo(f"{r.status:8s} {r.origin}: received {r.received}, accepted {r.accepted}, "
                   f"flagged {r.flagged}, rejected {r.rejected}, duplicate {r.duplicate}"
                   + (f" — {r.message}" if r.status in ("failed", "rejected") else ""))
    totals = {k: sum(getattr(r, k) for r in results)
              for k in ("received", "accepted", "flagged", "rejected", "duplicate")}
    click.echo(f"{len(results)} batch(es): " + ", ".join(f"{k} {v}" for k, v in totals.items()))
    if any(r.status in ("failed", "rejected") for r in results):
        raise SystemExit(1)
