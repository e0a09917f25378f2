"""Domain vocabulary shared by the unlabelled corpora and the labelled tasks.

Each class of the two downstream tasks has a list of characteristic terms
(``LEGAL_TERMS``, ``CLINICAL_TERMS`` in data/terms.json).  The corpora use
every one of these terms in natural context, so a model that has read the
corpora has seen them; the labelled training split only uses the first part
of each list (``SEEN``), the dev/test splits use all of it.

How each term is used in a sentence of the labelled tasks:
legal: "party" terms (``LEGAL_PARTY``) take "the" and are people/companies;
"mass" terms (``LEGAL_MASS``) take no article; every other term takes "the".
clinical (``CLINICAL_KIND``): S symptom, F finding or sign, T test,
D diagnosis, O object; a term not listed is a symptom.
"""

import _data

# How many of each list the training split may use.
SEEN = 8

LEGAL_TERMS, CLINICAL_TERMS, LEGAL_PARTY, LEGAL_MASS, CLINICAL_KIND = _data.tables(
    "terms", "LEGAL_TERMS CLINICAL_TERMS LEGAL_PARTY LEGAL_MASS CLINICAL_KIND")
LEGAL_PARTY, LEGAL_MASS = set(LEGAL_PARTY), set(LEGAL_MASS)
