"""Uploaded files on the site's forms: one size check, one message.

Each form keeps its own limit (an import file, a residual table, a photo are different things); the
check and the words a user reads when a file is too large are the same everywhere.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError

#: Largest mark or occupation import file taken from the pages.
IMPORT_MAX_BYTES = 20 * 1024 * 1024


def within_size(upload, limit_bytes: int):
    """``upload`` if it is at most ``limit_bytes``; otherwise a form error saying the limit in MB."""
    if upload.size > limit_bytes:
        raise ValidationError(
            "The file is larger than %(limit)d MB.", code="too_large", params={"limit": limit_bytes // 2**20}
        )
    return upload
