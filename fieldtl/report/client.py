"""Words for clients: internal notes taken out of texts, and the verdict's number formed in words.

Rules and clauses in the code carry notes for developers ("from memory", facts-sheet numbers,
"verified"); a client's report shows none of them. A text that carried "from memory" is marked
instead, and the report says once what the mark means (:data:`TOOL_DEFAULT`).
"""

from __future__ import annotations

import dataclasses
import re

from fieldtl.assess import Assessment

TOOL_DEFAULT = "the tool's default, check against your copy of the standard"
UNCONFIRMED_MARK = "†"
EXPLANATION = f"{UNCONFIRMED_MARK} Where this mark stands, the value used is {TOOL_DEFAULT}."

_FROM_MEMORY = re.compile(r"\s*[;,]?\s*(?:formula\s+|values?\s+)?from memory", re.IGNORECASE)
_FACTS_SHEET = re.compile(r"\s*[;,]?\s*(?:the project's\s+)?facts sheet"
                          r"(?:\s+[0-9][0-9.]*(?:\s*(?:,|and)\s*[0-9][0-9.]*)*)?(?:\s+table)?", re.IGNORECASE)
_VERIFIED = re.compile(r"\s*\(verified\)", re.IGNORECASE)


def client_text(text: str) -> tuple[str, bool]:
    """``text`` without internal notes, and whether it held a value not confirmed by the standard's text."""
    unconfirmed = "from memory" in text.lower()
    cleaned = _VERIFIED.sub("", _FACTS_SHEET.sub("", _FROM_MEMORY.sub("", text)))
    cleaned = re.sub(r"\(\s*[;,]?\s*\)", "", cleaned)          # brackets left empty
    cleaned = re.sub(r"\(\s*[;,]\s*", "(", cleaned)
    cleaned = re.sub(r"\s*[;,]\s*\)", ")", cleaned)
    cleaned = re.sub(r"\s+([:;,])", r"\1", re.sub(r"\s{2,}", " ", cleaned)).strip().rstrip(":;,")
    return cleaned, unconfirmed


def marked(text: str) -> str:
    """``text`` for a client: internal notes out, and :data:`UNCONFIRMED_MARK` where a value is not confirmed."""
    cleaned, unconfirmed = client_text(text)
    return f"{cleaned} {UNCONFIRMED_MARK}" if unconfirmed else cleaned


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
    """The assessment as clients may read it: rules, verdict statement, uncertainty note and findings
    without internal notes; if any value is marked unconfirmed, the rules end with :data:`EXPLANATION`
    (so every output says it once). Applying it twice changes nothing more."""
    rules = [marked(rule) for rule in assessment.rules_applied if rule != EXPLANATION]
    findings = tuple(dataclasses.replace(f, message=marked(f.message), action=marked(f.action),
                                         clause=client_text(f.clause)[0]) for f in assessment.findings)
    verdict = assessment.verdict
    if verdict is not None:
        verdict = dataclasses.replace(verdict, statement=marked(verdict.statement),
                                      uncertainty_note=marked(verdict.uncertainty_note))
    texts = [*rules, *(t for f in findings for t in (f.message, f.action)),
             *(() if verdict is None else (verdict.statement,)), marked(assessment.uncertainty_note)]
    if any(t.endswith(UNCONFIRMED_MARK) for t in texts):
        rules.append(EXPLANATION)
    return dataclasses.replace(assessment, rules_applied=tuple(rules), findings=findings, verdict=verdict,
                               uncertainty_note=marked(assessment.uncertainty_note))
