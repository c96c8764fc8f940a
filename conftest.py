"""pytest's root configuration: every Python block of README.md runs as a test (Sybil), each on its
own (a fresh namespace, as a reader would paste it) and in a scratch folder so files it writes vanish.
"""
import os
import shutil
import tempfile

from sybil import Sybil
from sybil.evaluators.python import PythonEvaluator
from sybil.parsers.markdown import CodeBlockParser


class OnItsOwn(PythonEvaluator):
    """Run a block in an empty namespace: it must import everything it uses."""

    def __call__(self, example):
        example.namespace.clear()
        example.namespace["__name__"] = "__readme__"
        return super().__call__(example)


_folders: list[tuple[str, str]] = []      # (where the run was, the scratch folder), per README


def _enter_scratch_folder(namespace):
    _folders.append((os.getcwd(), tempfile.mkdtemp(prefix="lifedraw-readme-")))
    os.chdir(_folders[-1][1])


def _leave_scratch_folder(namespace):
    home, scratch = _folders.pop()
    os.chdir(home)
    shutil.rmtree(scratch, ignore_errors=True)


pytest_collect_file = Sybil(
    parsers=[CodeBlockParser(language="python", evaluator=OnItsOwn())],
    patterns=["README.md"],
    setup=_enter_scratch_folder,
    teardown=_leave_scratch_folder,
).pytest()
