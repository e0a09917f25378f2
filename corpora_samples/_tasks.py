"""Small labelled downstream tasks.

legal:    short case summary  -> area of law (tenancy/employment/contract/family)
clinical: triage/referral note -> specialty (cardiology/respiratory/neurology/
          gastroenterology)

The tasks are deliberately hard to saturate: many examples carry no
characteristic term at all, others mention a term of another class as a
distractor, vocabulary is shared between classes, and a fixed share of labels
is rotated to a wrong class (label noise, class balance preserved).  The
training split only uses the first ``SEEN`` characteristic terms of each class;
dev and test use all of them, and the corpora use every term in context.
"""

from __future__ import annotations

import random

import _world as W
from _grammar import Grammar, tidy, word_count
from _terms import CLINICAL_KIND, CLINICAL_TERMS, LEGAL_MASS, LEGAL_PARTY, LEGAL_TERMS, SEEN

SIZES = {"train": 240, "dev": 80, "test": 200}
NOISE_PER_CLASS = {"train": 5, "dev": 2, "test": 5}   # ~8-10% label noise
# Per task: P(characteristic term of the class), P(second one), P(term of
# another class as a distractor), P(weak class-leaning sentence).
PARAMS = {
    "legal": {"cue": 0.48, "second": 0.15, "distractor": 0.55, "weak": 0.5},
    "clinical": {"cue": 0.82, "second": 0.2, "distractor": 0.4, "weak": 0.85},
}
MIN_WORDS, MAX_WORDS = 25, 60

# ---------------------------------------------------------------------------
LEGAL_OPEN = ["Summary:", "Case note:", "New matter.", "Intake note:", "For the listing clerk:",
              "Matter {caseno}:", "", "", "", "Enquiry received {date}.", "File opened {date}.",
              "Short summary -", "Advice line call:"]
LEGAL_FRAMES = {
    "issue": [
        "The dispute centres on {cue}.",
        "Short hearing requested about {cue}.",
        "{P} wants advice on {cue} [before the deadline|as soon as possible|this week].",
        "Main question: whether {cue} [can be challenged|applies here|was properly handled].",
        "[Letter|Email|Call] from {P} about {cue}.",
        "{P} [raised|queried|first mentioned] {cue} [in writing|by phone|at the first meeting].",
        "The papers concern {cue} and related sums.",
        "Issue identified: {cue}.",
        "Advice sought on {cue}[ and costs| and timing|].",
        "{P} asks whether {cue} [can be challenged|affects the claim|is worth pursuing].",
    ],
    "party": [
        "The problem is with {cue}.",
        "{P} says {cue} [has stopped replying|is being unreasonable|will not negotiate|has instructed solicitors].",
        "{P} wants to know what {cue} can [do next|demand|be made to pay].",
        "A letter from {cue} arrived on {date}.",
        "{P} has a long-running disagreement with {cue}.",
    ],
}
LEGAL_CLASS_FRAMES = {
    "tenancy": ["{P} has lived at the flat since {year} and now raises {cue}.",
                "The question of {cue} followed complaints about the property on {street}."],
    "employment": ["{P} worked at the depot for {n} years before the dispute over {cue}.",
                   "After the meeting about {cue}, {P} was told not to return to the site."],
    "contract": ["The point on {cue} relates to the units shipped to the warehouse in {town}.",
                 "{P}'s company raises {cue} after the order went wrong."],
    "family": ["The couple separated in {year}; {cue} is now contested.",
               "{P} raises {cue} at the first appointment."],
}
LEGAL_WEAK = {
    "tenancy": [
        "{P} moved into the property in {year} and pays monthly.",
        "Repairs to the bathroom were requested several times.",
        "The building has [damp|mould|a broken lift|a leaking roof].",
        "The agent kept [the keys|the inspection report] after {P} left.",
        "{P} says the lock was changed while [she|he] was away.",
        "Payments were late for [two|three] months in {year}.",
        "The owner wants the property back to sell it.",
        "Neighbours complained about noise from the upstairs flat.",
    ],
    "employment": [
        "{P} worked night shifts for {n} years.",
        "The manager changed the rota without consultation.",
        "{P} was told not to return after the meeting on {date}.",
        "Overtime was never paid, according to {P}.",
        "{P} signed a new agreement when the business was sold.",
        "The final payslip was short by {amt_small}.",
        "Colleagues were asked to give statements about the incident.",
        "{P} was moved to a different team after raising concerns.",
    ],
    "contract": [
        "The shipment arrived [late|damaged|incomplete] at the warehouse.",
        "The price for the units was agreed by email in {year}.",
        "The software went live [three|four] months after the agreed date.",
        "The other company stopped answering calls after the first payment.",
        "The agreement was signed by a director who had since left.",
        "Payment of {amt} is outstanding.",
        "The machines failed during testing at the site.",
        "{P}'s business lost a customer because of the delay.",
    ],
    "family": [
        "The couple separated in {year} after {n} years together.",
        "The youngest child has just started school.",
        "The father sees the children on alternate weekends.",
        "{P} wants to move to {town} with the children.",
        "The house was bought jointly in {year}.",
        "Monthly payments stopped after the new partner moved in.",
        "The grandparents have not seen the children since {year}.",
        "{P} says the other parent missed several handovers.",
    ],
}
LEGAL_DISTRACT = [
    "An earlier dispute about {ocue} was settled [last year|in {year}] and is not relevant.",
    "The other side refers to {ocue}, but that is a separate matter.",
    "{P} also mentions {ocue} in passing.",
    "Nothing turns on {ocue}.",
    "The file wrongly refers to {ocue}.",
    "{P} previously took advice on {ocue}.",
    "A related note mentions {ocue}.",
]
LEGAL_FILL = [
    "Hearing listed for {date} at {town}.",
    "Both parties are represented.",
    "{P} acts in person.",
    "The other party disputes the amount claimed.",
    "A bundle of [forty|sixty|ninety] pages has been filed.",
    "Costs reserved.",
    "Urgent directions sought.",
    "Mediation was offered but declined.",
    "The claim is valued at {amt}.",
    "Interpreter required.",
    "Witness statements are due by {date}.",
    "A previous payment was returned.",
    "Notice was given in writing.",
    "The agreement was signed in {year}.",
    "Documents are incomplete.",
    "{P} is anxious about costs.",
    "Limitation may be an issue.",
    "Please allocate to a junior fee earner.",
    "Conflict check clear.",
    "The other side is represented by {firm}.",
]

# ---------------------------------------------------------------------------
CLIN_OPEN = ["GP referral:", "Triage:", "ED note -", "Referral from {gp}:", "{age}{sx}.",
             "Ambulance handover:", "", "", "", "Phone triage {date}.", "Clinic referral -",
             "Urgent advice request:"]
CLIN_FRAMES = {
    "S": [
        "{age}{sx} c/o {cue} [x2/7|x3/7|since this morning|for 3 weeks|on and off for months].",
        "Presents with {cue}.",
        "Main issue {cue}, [worsening|intermittent|constant|improving].",
        "Referred for assessment of {cue}.",
        "[New|Recurrent|Ongoing] {cue}, [first episode|similar to last year|no previous history].",
        "Please see re {cue}.",
        "Concern is {cue}; [worse at night|worse on exertion|no clear trigger].",
        "{cue} noted by [GP|paramedics|triage nurse|family].",
        "Pt describes {cue} [since Monday|over the weekend|for a fortnight].",
        "Query {cue} - please advise.",
    ],
    "F": [
        "{cue} [on examination|noted by GP|found at triage].",
        "O/E: {cue}.",
        "New {cue} [noted|found on assessment].",
        "GP found {cue}[ last week| on a home visit|].",
        "{age}{sx}, {cue} on [exam|assessment].",
        "Referred with {cue}.",
        "Query {cue} - please advise.",
    ],
    "T": [
        "[Abnormal|Recent|Repeat] {cue}[ at the surgery| last week|].",
        "{cue} [abnormal|borderline|awaited|requested by GP].",
        "GP arranged {cue}; result [pending|abnormal|equivocal].",
        "Needs {cue} [today|urgently|this week].",
        "{age}{sx}, sent in after an abnormal {cue}.",
    ],
    "D": [
        "Known {cue}[, worse this week|, usually stable|].",
        "Possible {cue}.",
        "Suspected {cue} - please see.",
        "{cue} diagnosed in {year}, now deteriorating.",
        "Previous {cue}, now worse.",
    ],
    "O": [
        "Using {cue} [more often|every hour|with no relief].",
        "Ran out of {cue} [last week|on {date}].",
        "{cue} not helping.",
    ],
}
CLIN_CLASS_FRAMES = {
    "cardiology": ["{cue} when walking uphill, settles with rest.", "{cue}, known hypertension."],
    "respiratory": ["{cue} with green sputum, smoker.", "{cue}, worse in cold weather."],
    "neurology": ["{cue}, sudden onset, family noticed.", "{cue} after waking, no head injury."],
    "gastroenterology": ["{cue} after meals.", "{cue}, drinks {units} units/week."],
}
CLIN_WEAK = {
    "cardiology": ["Takes {cdrug} and {cdrug}.", "Known hypertension, ex-smoker.",
                   "Father had an MI at {young}.", "Pain worse on exertion.",
                   "Pulse irregular on palpation.", "Legs swollen by evening.",
                   "Breathless lying flat.", "BP {bp} at the surgery."],
    "respiratory": ["Uses {rdrug}.", "Smoker, {n} pack-years.", "Ex-miner.",
                    "Coughing at night.", "Temp {temp}, shivery.", "Sats low on the walk test.",
                    "Recent chest infection treated by GP.", "Breathless climbing stairs."],
    "neurology": ["Known migraine.", "Drives for a living.", "Word-finding difficulty.",
                  "Vision blurred for an hour.", "Started {ndrug} last year.", "Unsteady when walking.",
                  "Wife noticed confusion after the episode.", "Tingling in the fingers."],
    "gastroenterology": ["On {gdrug}.", "Drinks {units} units/week.", "Lost {kg} kg in two months.",
                         "Stools dark this week.", "Heartburn most nights.", "Tender upper abdomen.",
                         "Bloating after food.", "Appetite poor."],
}
CLIN_SHARED = {
    "cardiology": ["chest pain", "breathlessness", "dizziness", "a collapse", "fatigue"],
    "respiratory": ["chest pain", "breathlessness", "fever", "fatigue", "weight loss"],
    "neurology": ["dizziness", "a collapse", "nausea", "confusion", "a headache"],
    "gastroenterology": ["nausea", "chest pain", "weight loss", "fever", "fatigue"],
}
CLIN_DISTRACT = {
    "S": ["Previous {ocue} [resolved|investigated in {year}], not the current problem.", "No {ocue}.",
          "Denies {ocue}.", "History of {ocue} years ago.", "{ocue} mentioned by daughter, not confirmed."],
    "F": ["No {ocue}.", "No {ocue} on examination.", "GP queried {ocue} but this seems unlikely."],
    "T": ["{ocue} normal [last year|in {year}].", "{ocue} done by GP - normal.", "Had {ocue} in {year}, unremarkable."],
    "D": ["Family history of {ocue}.", "History of {ocue} years ago.", "GP queried {ocue} but this seems unlikely."],
    "O": ["Has a spare {ocue} at home.", "Previously prescribed {ocue}."],
}
CLIN_FILL = [
    "Obs: HR {hr} BP {bp} T {temp}.",
    "NEWS2 {news}.",
    "Lives alone.",
    "NKDA.",
    "Bloods sent.",
    "Seen by triage nurse at {time}.",
    "PMH: [T2DM|OA|hypothyroid|depression], [CKD3|gout|asthma as a child].",
    "Daughter present.",
    "Please review.",
    "[Routine|Soon|Urgent] referral.",
    "Independent, walks with a stick.",
    "Anxious.",
    "Pain score {pain}/10.",
    "Not on anticoagulants.",
    "Works as a [teacher|driver|cleaner|farmer].",
    "Carer visits daily.",
    "Waiting time {n} hours.",
    "Seen by GP last week.",
    "Self-presented.",
    "Obs stable.",
]


def _slots() -> dict:
    s = W.base_slots()
    s.update({
        "street": lambda r: f"{r.choice(W.STREET_NAMES)} {r.choice(W.STREET_KINDS)}",
        "firm": W.LAW_FIRMS, "gp": W.GP_PRACTICES,
        "sx": ["M", "F", "M", "F", " y/o male", " y/o female"],
        "hr": lambda r: str(r.randint(55, 125)), "bp": lambda r: f"{r.randint(95, 185)}/{r.randint(55, 100)}",
        "temp": lambda r: f"{r.uniform(36.0, 38.8):.1f}", "news": lambda r: str(r.randint(0, 6)),
        "time": lambda r: f"{r.randint(0, 23):02d}:{r.randint(0, 59):02d}", "pain": lambda r: str(r.randint(1, 9)),
        "young": lambda r: str(r.randint(42, 59)), "units": lambda r: str(r.randint(20, 90)),
        "kg": lambda r: str(r.randint(3, 12)), "age": lambda r: str(r.randint(18, 93)),
        "cdrug": W.DRUGS["cardiology"], "rdrug": W.DRUGS["respiratory"],
        "ndrug": W.DRUGS["neurology"], "gdrug": W.DRUGS["gastroenterology"],
    })
    return s


def _example(g: Grammar, label: str, terms: dict, split: str, legal: bool) -> str:
    rng = g.rng
    labels = list(terms)
    pool = terms[label] if split != "train" else terms[label][:SEEN]
    if legal:
        g.ctx = {"P": rng.choice(["the client", "the applicant", W.titled(rng), W.titled(rng),
                                  "Mr " + W.surname(rng), "Ms " + W.surname(rng), "the caller"])}
        opens, frames, cframes, weak, distract, fill = (LEGAL_OPEN, LEGAL_FRAMES, LEGAL_CLASS_FRAMES,
                                                        LEGAL_WEAK, LEGAL_DISTRACT, LEGAL_FILL)
    else:
        g.ctx = {"age": str(rng.randint(18, 93))}
        opens, frames, cframes, weak, distract, fill = (CLIN_OPEN, CLIN_FRAMES, CLIN_CLASS_FRAMES,
                                                        CLIN_WEAK, CLIN_DISTRACT, CLIN_FILL)
    body: list[str] = []
    p = PARAMS["legal" if legal else "clinical"]

    def phrase(term: str) -> tuple[str, str]:
        """(text to insert, kind) for a characteristic term."""
        if legal:
            if term in LEGAL_PARTY:
                return "the " + term, "party"
            return (term if term in LEGAL_MASS else "the " + term), "issue"
        return term, CLINICAL_KIND.get(term, "S")

    def cue_sentence(term: str) -> str:
        text, kind = phrase(term)
        g.ctx["cue"] = text
        if kind in ("issue", "S") and rng.random() < 0.3:
            return g.s(rng.choice(cframes[label]))
        return g.s(rng.choice(frames[kind]))

    if rng.random() < p["cue"]:
        body.append(cue_sentence(rng.choice(pool)))
        if rng.random() < p["second"]:
            body.append(cue_sentence(rng.choice(pool)))
    elif not legal:
        g.ctx["cue"] = rng.choice(CLIN_SHARED[label])
        body.append(g.s(rng.choice(frames["S"])))
    if rng.random() < p["weak"] or not body:
        body.append(g.pick(weak[label]))
    if rng.random() < p["distractor"]:
        other = rng.choice([l for l in labels if l != label])
        opool = terms[other] if split != "train" else terms[other][:SEEN]
        text, kind = phrase(rng.choice(opool))
        g.ctx["ocue"] = text
        body.append(g.pick(distract if legal else distract[kind]))
    fillers = g.sample(fill, rng.randint(1, 4))
    sentences = body + fillers
    rng.shuffle(sentences)
    opener = g.s(rng.choice(opens))
    text = " ".join(([opener] if opener else []) + sentences)
    spare = rng.sample(fill, len(fill))
    while word_count(text) < MIN_WORDS and spare:
        s = g.s(spare.pop())
        if s not in sentences:
            text += " " + s
    while word_count(text) > MAX_WORDS and fillers:
        drop = fillers.pop()
        text = text.replace(" " + drop, "").replace(drop + " ", "")
    words = text.split()
    if len(words) > MAX_WORDS:
        text = " ".join(words[:MAX_WORDS])
    return tidy(text)


def _split(g: Grammar, terms: dict, split: str, legal: bool) -> list[dict]:
    rng = g.rng
    labels = list(terms)
    per_class = SIZES[split] // len(labels)
    rows = [{"text": _example(g, lab, terms, split, legal), "label": lab}
            for lab in labels for _ in range(per_class)]
    # label noise: move k examples per class to other classes; every class
    # sends and receives the same numbers, so the balance is kept
    k = NOISE_PER_CLASS[split]
    by_class = {lab: [i for i, r in enumerate(rows) if r["label"] == lab] for lab in labels}
    chosen = {lab: rng.sample(by_class[lab], k) for lab in labels}
    offsets = [1 + (i % (len(labels) - 1)) for i in range(k)]   # same multiset for every class
    for j, lab in enumerate(labels):
        for i, off in zip(chosen[lab], rng.sample(offsets, k)):
            rows[i]["label"] = labels[(j + off) % len(labels)]
    rng.shuffle(rows)
    return rows


def make_tasks(rng: random.Random) -> dict[str, dict[str, list[dict]]]:
    g = Grammar(rng, _slots())
    out: dict[str, dict[str, list[dict]]] = {}
    for name, terms, legal in [("legal", LEGAL_TERMS, True), ("clinical", CLINICAL_TERMS, False)]:
        out[name] = {split: _split(g, terms, split, legal) for split in SIZES}
    return out


NOISE_COUNTS = {split: 4 * k for split, k in NOISE_PER_CLASS.items()}
