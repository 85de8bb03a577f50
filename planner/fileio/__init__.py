"""What the two file readers share: one way to read a file's text, one way to word a problem.

The plan-file reader (:mod:`planner.planfile`) and the saved-result reader
(:mod:`planner.resultfile`) both read a UTF-8 file of bounded size, and both turn a problem
(their own findings, and pydantic's validation errors) into the one message shape of
:mod:`planner.errors`, "key.path: problem (got value). Fix: hint", naming the file once:

- :mod:`planner.fileio.text`: ``read_text`` and the kinds of file with their size limits;
- :mod:`planner.fileio.problems`: ``ContentError``, ``fail``, ``explain`` (a pydantic
  ``ValidationError`` in the file's words), ``public_error`` and the words of each format.
"""
