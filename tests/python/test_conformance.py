"""The protocol conformance suite for kernels (jupyter_kernel_test, PyPI) run against Partita.

Only the stdout, stderr, pager, clear_output and history tests may skip: Partita writes no
streams, pages nothing and keeps no history.
"""
import pathlib
import tempfile
import unittest

import jupyter_kernel_test

DATA = pathlib.Path(tempfile.mkdtemp(prefix="partita-jkt-")) / "tiny.csv"
DATA.write_text("feed,weight\nA,1.5\nA,2.5\nB,3\nB,4\n")


class PartitaKernelTests(jupyter_kernel_test.KernelTests):
    kernel_name = "partita"
    language_name = "partita"
    file_extension = ".partita"

    completion_samples = [
        {"text": "anov", "matches": {"anova"}},
        {"text": "plot bo", "matches": {"box"}},
        {"text": "re", "matches": {"read"}},
    ]
    complete_code_samples = ["help", f'read "{DATA}" as t', "anova weight across feed,\n  pen"]
    incomplete_code_samples = ["anova weight across feed,", "describe y across a,\n  b,"]
    invalid_code_samples = ["anova weight feed", 'read "unclosed', "12 + 3"]

    code_generate_error = "anova weight across feed in nothing_read_yet"

    # The read summary is Partita's own plain-text format (engine/src/session.rs, read_answer).
    # Its own dataset name: a second read of `t` would add the note that nothing changed.
    code_execute_result = [
        {
            "code": f'read "{DATA}" as first_read',
            "result": f"dataset first_read: 4 rows × 2 columns from {DATA} (comma-separated)\n"
            "  feed: factor, 2 levels: A, B\n"
            "  weight: numeric, range 1.5 to 4",
        },
        {"code": f'read "{DATA}" as t\nanova weight across feed in t', "mime": "image/svg+xml"},
    ]
    code_display_data = [
        {"code": f'read "{DATA}" as t\nshow t', "mime": "text/html"},
        {"code": f'read "{DATA}" as t\nshow t', "mime": "application/vnd.partita.result+json"},
    ]
    code_inspect_sample = "anova"


if __name__ == "__main__":
    unittest.main()
