"""Range and code checks for command options, each naming the values it accepts.

The commands and the dashboard call these before any work, so that a bad option is one clear
``error:`` line (ConfigError, exit code 2) instead of being accepted silently or failing later
in a child process.
"""

from __future__ import annotations

from collections.abc import Iterable

from exposhift.errors import ConfigError
from exposhift.io.rules import YEAR_RANGE

#: ports a user process may listen on (1-1023 need administrator rights on most systems)
PORT_RANGE = (1, 65535)


def check_port(port: int, option: str = "--port") -> int:
    """A TCP port number 1-65535 (RFC 793 / RFC 6335 port range)."""
    lo, hi = PORT_RANGE
    if not lo <= port <= hi:
        raise ConfigError(
            f"{option} {port} is not a port; give a number from {lo} to {hi} "
            "(e.g. 8501; 1-1023 usually need administrator rights)"
        )
    return port


def check_year(value: int | None, option: str) -> int | None:
    """A calendar year in the range the extraction sheet accepts."""
    if value is None:
        return None
    lo, hi = YEAR_RANGE
    if not lo <= value <= hi:
        raise ConfigError(
            f"{option} {value} is not a year exposhift records; give a year from {lo} to {hi}"
        )
    return value


def check_countries(codes: Iterable[str], option: str = "--country") -> tuple[str, ...]:
    """ISO 3166-1 alpha-3 codes (upper-cased), as pycountry lists them."""
    import pycountry

    known = {c.alpha_3 for c in pycountry.countries}
    out, bad = [], []
    for code in codes:
        up = code.strip().upper()
        if not up:
            continue
        (out if up in known else bad).append(up if up in known else code.strip())
    if bad:
        hints = []
        for b in bad:
            try:
                found = pycountry.countries.lookup(b)
                hints.append(f"{b!r} (did you mean {found.alpha_3}, {found.name}?)")
            except LookupError:
                hints.append(repr(b))
        raise ConfigError(
            f"{option}: unknown ISO 3166-1 alpha-3 country code "
            f"{', '.join(hints)}; give codes such as NLD, GBR or USA"
        )
    return tuple(out)
