"""DRF's content negotiation, its choice remembered per ``Accept`` header.

Every API request chooses its renderer from the ``Accept`` header (DRF's ``DefaultContentNegotiation``:
the header parsed into media types, ordered by precedence, matched against each renderer). The choice
depends on nothing but the header, the ``format`` asked for and the view's renderers, and clients send the
same few headers again and again, so each process remembers the choice (which of the renderers, which
media type) for those three and skips the parsing next time. Nothing of the request, its user or its
answer is kept. A request no renderer suits is refused as DRF refuses it (406), every time.
"""

from __future__ import annotations

from rest_framework.negotiation import DefaultContentNegotiation

#: At most this many remembered choices per process (then forgotten all at once and learnt again):
#: the header is the client's to choose.
MAX_REMEMBERED = 256
#: Longer headers are negotiated each time, never remembered.
MAX_REMEMBERED_HEADER_CHARS = 512

_choices: dict[tuple, tuple[int, str]] = {}


class RememberedContentNegotiation(DefaultContentNegotiation):
    def select_renderer(self, request, renderers, format_suffix=None):
        accept = request.META.get("HTTP_ACCEPT")
        if accept is not None and len(accept) > MAX_REMEMBERED_HEADER_CHARS:
            return super().select_renderer(request, renderers, format_suffix)
        fmt = format_suffix or request.query_params.get(self.settings.URL_FORMAT_OVERRIDE)
        key = (accept, fmt, tuple((type(r), r.media_type, r.format) for r in renderers))
        known = _choices.get(key)
        if known is not None:
            return renderers[known[0]], known[1]
        renderer, media_type = super().select_renderer(request, renderers, format_suffix)  # 404/406 raise here
        index = next(i for i, r in enumerate(renderers) if r is renderer)
        if len(_choices) >= MAX_REMEMBERED:
            _choices.clear()
        _choices[key] = (index, media_type)
        return renderer, media_type
