"""Short quotations of user text for error messages.

A message quotes what the user wrote so they can find it, but a part name of a
megabyte or a number of five thousand digits must not come back whole: a quotation is
cut to :data:`EXCERPT_CHARS` characters, with an ellipsis and the full length, so every
message stays one readable paragraph.
"""

from __future__ import annotations

#: Most characters of a user value quoted in a message.
EXCERPT_CHARS = 60


def excerpt(text: str, limit: int = EXCERPT_CHARS) -> str:
    """``text`` itself when short, else its first characters, ``…`` and its length.

    Parameters
    ----------
    text
        The user's text.
    limit
        Most characters kept.

    Returns
    -------
    str
        ``text`` when it has at most ``limit`` characters, else for example
        ``"PPPP… (1000000 characters)"`` (the kept part is ``limit`` characters long).
    """
    if len(text) <= limit:
        return text
    return f"{text[:limit]}… ({len(text)} characters)"


def quoted(text: str, limit: int = EXCERPT_CHARS) -> str:
    """``repr`` of ``text``, or of its first ``limit`` characters with its length after.

    Parameters
    ----------
    text
        The user's text.
    limit
        Most characters kept inside the quotes.

    Returns
    -------
    str
        ``'4.7u'`` as :func:`repr` gives it when short, else for example
        ``'111…' (5000 characters)``.
    """
    if len(text) <= limit:
        return repr(text)
    return f"{text[:limit] + '…'!r} ({len(text)} characters)"
