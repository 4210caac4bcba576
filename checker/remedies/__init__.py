"""Remedies: for each failing limit, the single part change that fixes it, on a value that can be
bought, confirmed against every limit of its circuit (docs/remedies.md).

`series` holds the IEC 60063 preferred-number series, power ratings and snapping (no dependencies:
the limit language's `preferred()` uses it); `search` finds and confirms the remedies.
"""
