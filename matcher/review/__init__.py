"""Reviewing a screened run: decisions per peak kept in a record beside the result.

Rooms inside: :mod:`matcher.review.record` (the record, pure: no files, no clock of its
own), :mod:`matcher.review.session` (one review of one result file: reads the result,
reads and writes the record through :mod:`matcher.io.atomic`), :mod:`matcher.review.exporting`
(the reviewed list as CSV and as an HTML report section), :mod:`matcher.review.confirming`
(peaks marked as confirmed with an authentic standard into the library, through the checks
of ``matcher confirm``) and, at the edge, :mod:`matcher.review.server` (the local page and
its API; the only module that imports the web stack).

Accepting a candidate in review is a putative annotation, not a confirmation.
"""
