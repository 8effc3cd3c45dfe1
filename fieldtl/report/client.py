"""Words for clients: the one explanation of the unconfirmed mark, and the verdict's number formed in words.

The core writes texts without internal notes and marks a text whose value is the tool's default, not
confirmed from the standard's text, with :data:`UNCONFIRMED_MARK` (:func:`fieldtl.findings.unconfirmed`);
a client's report says once what the mark means (:data:`EXPLANATION`).
"""

from __future__ import annotations

import dataclasses

from fieldtl.assess import Assessment
from fieldtl.findings import UNCONFIRMED_MARK

TOOL_DEFAULT = "the tool's default, check against your copy of the standard"
EXPLANATION = f"{UNCONFIRMED_MARK} Where this mark stands, the value used is {TOOL_DEFAULT}."

__all__ = ["EXPLANATION", "TOOL_DEFAULT", "UNCONFIRMED_MARK", "client_assessment", "compared_value"]


def compared_value(assessment: Assessment) -> str:
    """"DnT,w + Ctr = 54 - 4 = 50 dB": the verdict's number formed from the single-number table."""
    verdict = assessment.verdict
    if verdict is None:
        return ""
    requirement = verdict.requirement
    rating = assessment.rating(requirement.descriptor)
    term = requirement.adaptation_term
    if rating is None:
        return f"{verdict.value_db:.0f} dB"
    if term is None:
        return f"{rating.descriptor} = {rating.single_number_db} dB"
    term_db = rating.adaptation_terms_db[term]
    sign = "-" if term_db < 0 else "+"       # as the verdict statement writes it (fieldtl.assess)
    return (f"{rating.descriptor} + {term} = {rating.single_number_db} {sign} {abs(term_db)} = "
            f"{rating.single_number_db + term_db} dB")


def client_assessment(assessment: Assessment) -> Assessment:
    """The assessment as clients may read it: if any text (rule, finding, verdict statement, uncertainty
    note) carries :data:`UNCONFIRMED_MARK`, the rules end with :data:`EXPLANATION` (so every output says
    it once). Applying it twice changes nothing more."""
    verdict = assessment.verdict
    texts = [*assessment.rules_applied, *(t for f in assessment.findings for t in (f.message, f.action)),
             *(() if verdict is None else (verdict.statement, verdict.uncertainty_note)),
             assessment.uncertainty_note]
    rules = [rule for rule in assessment.rules_applied if rule != EXPLANATION]
    if any(t.endswith(UNCONFIRMED_MARK) for t in texts):
        rules.append(EXPLANATION)
    return dataclasses.replace(assessment, rules_applied=tuple(rules))
