"""steam-edge: an advisory steam plant monitor (reads, computes, never writes)."""

__version__ = "0.1.0"

ADVISORY_NOTICE = (
    "steam-edge is advisory only: it reads and computes, never writes to a controller, and "
    "never replaces certified safety controls (burner management, low-water cut-offs, "
    "safety valves). Local codes, licensed practice and site procedures govern."
)
