"""tabpar cache: show or clear the cache of prepared arrays."""
from __future__ import annotations

ACTIONS = ("info", "clear")


def add_parser(subparsers) -> None:
    cache = subparsers.add_parser(
        "cache", help="show or clear the cache of prepared arrays",
        description="Loaded, split and prepared arrays are cached per task, keyed by the task "
                    "definition, the data fingerprint, the procedure and the preparing code; any "
                    "change of those makes a new entry.")
    cache.add_argument("action", choices=list(ACTIONS), help=" or ".join(ACTIONS))
    cache.set_defaults(func=cache_command)


def cache_command(args) -> int:
    from tabpar.cli.render import render_cache
    from tabpar.common.paths import CACHE_ENV
    from tabpar.execution.cache import cache_clear, cache_info

    if args.action == "clear":
        print(f"removed {cache_clear()} cached entries from {cache_info()['folder']}")
        return 0
    print(render_cache(cache_info(), CACHE_ENV))
    return 0
