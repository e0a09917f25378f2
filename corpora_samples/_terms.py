"""Domain vocabulary shared by the unlabelled corpora and the labelled tasks.

Each class of the two downstream tasks has a list of characteristic terms.
The corpora use every one of these terms in natural context, so a model that
has read the corpora has seen them; the labelled training split only uses the
first part of each list (``SEEN``), the dev/test splits use all of it.
"""

LEGAL_TERMS = {
    "tenancy": [
        "rent arrears", "notice to quit", "security deposit", "possession order",
        "periodic tenancy", "landlord", "tenant", "repair covenant",
        "quiet enjoyment", "holdover", "dilapidations schedule",
        "distraint for rent", "forfeiture of the lease", "rent review clause",
    ],
    "employment": [
        "unfair dismissal", "redundancy", "disciplinary hearing", "grievance",
        "notice pay", "holiday pay", "employer", "line manager",
        "garden leave", "restraint of trade", "constructive dismissal",
        "protected disclosure", "zero-hours engagement", "wrongful dismissal",
    ],
    "contract": [
        "breach of warranty", "liquidated damages", "supplier", "invoice",
        "purchase order", "limitation of liability", "delivery schedule",
        "indemnity", "force majeure", "rescission", "misrepresentation",
        "specific performance", "retention of title", "novation",
    ],
    "family": [
        "contact order", "child maintenance", "custody", "matrimonial home",
        "separation", "children", "mediation", "parenting plan",
        "guardian ad litem", "ancillary relief", "financial remedy",
        "spousal support", "relocation application", "non-molestation order",
    ],
}

CLINICAL_TERMS = {
    "cardiology": [
        "palpitations", "chest tightness", "ECG", "troponin", "atrial fibrillation",
        "exertional chest pain", "ankle oedema", "murmur",
        "ST depression", "ejection fraction", "orthopnoea", "NSTEMI", "LBBB",
        "paroxysmal nocturnal dyspnoea",
    ],
    "respiratory": [
        "wheeze", "productive cough", "sputum", "inhaler", "peak flow",
        "crackles", "COPD", "chest X-ray",
        "spirometry", "pleural effusion", "haemoptysis", "FEV1", "bronchiectasis",
        "pleuritic pain",
    ],
    "neurology": [
        "headache", "seizure", "facial droop", "slurred speech", "limb weakness",
        "numbness", "tremor", "CT head",
        "diplopia", "dysarthria", "ataxia", "photophobia", "postictal drowsiness",
        "hemianopia",
    ],
    "gastroenterology": [
        "epigastric pain", "vomiting", "diarrhoea", "abdominal pain", "LFTs",
        "jaundice", "rectal bleeding", "reflux",
        "melaena", "haematemesis", "dysphagia", "ascites", "steatorrhoea",
        "OGD",
    ],
}

# How many of each list the training split may use.
SEEN = 8

# How each term is used in a sentence of the labelled tasks.
# legal: "party" terms take "the" and are people/companies; "mass" terms take
# no article; every other term takes "the".
LEGAL_PARTY = {"landlord", "tenant", "employer", "line manager", "supplier"}
LEGAL_MASS = {
    "rent arrears", "quiet enjoyment", "distraint for rent", "forfeiture of the lease",
    "unfair dismissal", "redundancy", "notice pay", "holiday pay", "garden leave",
    "restraint of trade", "constructive dismissal", "wrongful dismissal", "breach of warranty",
    "liquidated damages", "limitation of liability", "force majeure", "rescission",
    "misrepresentation", "specific performance", "retention of title", "novation",
    "child maintenance", "custody", "separation", "mediation", "ancillary relief",
    "spousal support", "indemnity", "financial remedy",
}
# clinical: S symptom, F finding or sign, T test, D diagnosis, O object
CLINICAL_KIND = {
    "ECG": "T", "troponin": "T", "ejection fraction": "T", "ST depression": "F", "LBBB": "F",
    "atrial fibrillation": "D", "NSTEMI": "D", "murmur": "F", "ankle oedema": "F",
    "inhaler": "O", "peak flow": "T", "chest X-ray": "T", "spirometry": "T", "FEV1": "T",
    "crackles": "F", "pleural effusion": "F", "COPD": "D", "bronchiectasis": "D",
    "CT head": "T", "facial droop": "F", "dysarthria": "F", "ataxia": "F",
    "postictal drowsiness": "F", "hemianopia": "F",
    "LFTs": "T", "OGD": "T", "jaundice": "F", "ascites": "F",
}
