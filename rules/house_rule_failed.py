"""What it finds: a house rule that could not run: its module failed to import (a syntax
error, a missing name, no `RULE` or `check`), its `check` raised, yielded something other
than a finding, or ran past its time limit (`[limits] house_rule_time`, default 10 s).

Why it matters: a rule that did not run found nothing, and silence would read as a pass.
The finding says which rule failed and where; every other rule still ran and the report
is otherwise complete. The failed rule's own findings from that run are left out.

How it is computed: not by this module, whose check finds nothing. Loading (drc.registry)
and the runner (drc.running) make these findings: at the line of the rule's file where it
failed (the deepest frame of the traceback in that file, or the line it was running when
its time ran out), else at its `check` function. Its severity is always error and the
config's `[rule."house-rule-failed"]` changes nothing: a failure is never hidden.

Example: a house rule that reads `branch.current` (no such attribute) raises
AttributeError at its line 12: one finding at checks/min_current.py:12.

Fix: correct the rule module (`drc explain` shows its help; drc.api documents what a rule
may use); for a time-out, make it cheaper or raise the limit in `[limits]`.

Sources: none; a property of drc's rule runner.
"""

from drc.api import Rule

RULE = Rule(id="house-rule-failed", severity="error",
            summary="a house rule that could not be loaded, raised, or ran past its time limit "
                    "(the other rules still ran)")


def check(design, settings):
    return ()
