"""Per-document author styles.

Each document gets an invented author with habits: preferred synonyms,
discourse markers, references to bundle pages, abbreviations, digits or
number words, -ise or -ize spellings, contractions.  The habits are applied
to every sentence the grammar produces for that document, so the same
underlying pattern reads differently from one author to the next.
"""

from __future__ import annotations

import random
import re
from typing import Callable

Style = Callable[[str], str]

MARKERS = {
    "legal": ["Further,", "In addition,", "Moreover,", "Importantly,", "For completeness,",
              "It is right to record that", "I note that", "As I have said,", "Plainly,",
              "In any event,", "For my part,", "It follows that", "Notably,", "Equally,",
              "Be that as it may,", "That said,", "On the evidence,", "Significantly,"],
    "clinical": ["Of note,", "Reassuringly,", "Unfortunately,", "Interestingly,", "As you know,",
                 "In addition,", "Importantly,", "Incidentally,", "On review,", "Overall,",
                 "Clinically,", "Encouragingly,", "Of concern,"],
    "general": ["Honestly,", "To be fair,", "Funnily enough,", "Of course,", "As usual,",
                "Mind you,", "Also,", "Anyway,", "Sadly,", "Happily,", "Oddly,", "Needless to say,",
                "In fairness,", "Still,"],
}
LOWER_STARTS = {"The", "This", "That", "There", "It", "He", "She", "We", "They", "A", "An", "No",
                "In", "On", "At", "By", "For", "Both", "Any", "Neither", "If", "His", "Her", "Its",
                "These", "Those", "Since", "After", "During", "Our", "My", "Each", "Nothing",
                "Counsel", "Most", "Some", "Several", "Two", "Three", "One", "Parking", "Rain",
                "Battery", "Build", "Setup", "Locals", "Volunteers", "Tickets", "Winds"}

SYNONYMS = {
    "legal": [
        ("submitted", ["submitted", "argued", "contended", "urged"]),
        ("I do not accept", ["I do not accept", "I reject", "I cannot accept"]),
        ("considered", ["considered", "examined", "reviewed", "looked at"]),
        ("I am satisfied", ["I am satisfied", "I am persuaded", "I find"]),
        ("it is common ground", ["it is common ground", "it is agreed", "it is not disputed"]),
        ("It is common ground", ["It is common ground", "It is agreed", "It is not disputed"]),
        ("In my judgment", ["In my judgment", "In my view", "In my opinion", "I consider that"]),
        ("the claimant", ["the claimant", "the claimant", "C"]),
        ("the respondent", ["the respondent", "the respondent", "R"]),
        ("documents", ["documents", "papers", "documents"]),
        ("however", ["however", "nevertheless", "even so"]),
        ("dispute", ["dispute", "controversy", "dispute"]),
        ("We enclose", ["We enclose", "Please find enclosed", "Enclosed is"]),
        ("We write", ["We write", "We are writing", "I write"]),
        ("our client", ["our client", "our client", "our clients"]),
        ("within", ["within", "no later than", "within"]),
        ("relies on", ["relies on", "relies upon", "invokes"]),
        ("shall", ["shall", "shall", "will"]),
        ("pursuant to", ["pursuant to", "under", "in accordance with"]),
    ],
    "clinical": [
        ("patient", ["patient", "pt", "patient"]),
        ("history", ["history", "hx", "history"]),
        ("examination", ["examination", "exam", "O/E"]),
        ("with", ["with", "w/", "with"]),
        ("without", ["without", "w/o"]),
        ("years", ["years", "yrs", "years"]),
        ("review", ["review", "r/v", "review"]),
        ("breathlessness", ["breathlessness", "SOB", "shortness of breath", "dyspnoea"]),
        ("admission", ["admission", "adm", "admission"]),
        ("bilateral", ["bilateral", "bilat"]),
        ("increased", ["increased", "up-titrated", "increased"]),
        ("started", ["started", "commenced", "initiated"]),
        ("discussed", ["discussed", "went over", "went through"]),
        ("worried", ["worried", "concerned", "anxious"]),
        ("thank you", ["thank you", "thanks", "many thanks"]),
        ("I would be grateful", ["I would be grateful", "I'd be grateful", "I would appreciate it"]),
        ("follow-up", ["follow-up", "F/U", "follow up"]),
    ],
    "general": [
        ("do not", ["do not", "don't"]), ("it is", ["it is", "it's"]), ("I am", ["I am", "I'm"]),
        ("I have", ["I have", "I've"]), ("cannot", ["cannot", "can't"]), ("very", ["very", "really", "pretty", "quite"]),
        ("good", ["good", "decent", "great"]),
        ("lovely", ["lovely", "gorgeous", "nice"]), ("small", ["small", "little", "tiny"]),
        ("wonderful", ["wonderful", "stunning", "fantastic"]), ("a lot", ["a lot", "loads"]),
        ("said", ["said", "told us", "explained"]),
    ],
}
NUMBER_WORDS = {"two": "2", "three": "3", "four": "4", "five": "5", "six": "6", "seven": "7",
                "eight": "8", "nine": "9", "ten": "10", "twelve": "12", "twenty": "20", "thirty": "30",
                "forty": "40", "fifty": "50", "eleven": "11", "fourteen": "14"}
IZE = ["recognise", "organise", "summarise", "apologise", "authorise", "realise", "emphasise",
       "minimise", "characterise", "prioritise", "finalise", "criticise"]
REFS = [" ([B/{n}])", " (bundle p. {n})", " (see para {n} above)", " (transcript, day {d}, p. {n})",
        " ([{n}] of the decision below)", " (tab {d})", " (B{d}/{n})", " (para {n} of the witness statement)"]
CLIN_TAGS = [" (see above)", " (per GP letter)", " (per family)", " (?significance)", " - d/w reg",
             " (pt's own words)", " (result pending)", " (documented)", " - noted"]
GEN_TAGS = [" :)", " - who knew?", " (more on that later)", "!", " (again)", " - typical!", " (thanks, {name})"]


def _word_re(word: str) -> re.Pattern:
    return re.compile(r"\b" + re.escape(word) + r"\b")


_COMPILED: dict[str, re.Pattern] = {}


def _sub(text: str, word: str, repl: str) -> str:
    pat = _COMPILED.get(word)
    if pat is None:
        pat = _COMPILED[word] = _word_re(word)
    return pat.sub(repl, text)


def author(rng: random.Random, domain: str, formal: bool = True) -> Style:
    """Draw an author profile and return the function that applies it."""
    marker_rate = rng.choice([0.0, 0.05, 0.1, 0.15, 0.25])
    markers = rng.sample(MARKERS[domain], rng.randint(3, len(MARKERS[domain])))
    syn_choice = [(w, rng.choice(v)) for w, v in SYNONYMS[domain] if rng.random() < 0.7]
    syn_choice = [(w, v) for w, v in syn_choice if w != v]
    digits = rng.random() < (0.25 if formal else 0.6)
    ize = rng.random() < 0.2
    tag_rate = rng.choice([0.0, 0.0, 0.06, 0.12, 0.2])
    tags = {"legal": REFS, "clinical": CLIN_TAGS, "general": GEN_TAGS}[domain]
    tags = rng.sample(tags, rng.randint(2, len(tags)))
    if domain == "legal" and not formal:
        tag_rate = min(tag_rate, 0.05)
    names = ["Jo", "Pip", "Mags", "Dev", "Alf", "Kit"]

    def apply(sentence: str) -> str:
        if not sentence or "\n" in sentence or len(sentence.split()) < 4:
            return sentence
        s = sentence
        for w, v in syn_choice:
            if w in s:
                s = _sub(s, w, v)
        if digits:
            for w, d in NUMBER_WORDS.items():
                if w in s:
                    s = _sub(s, w, d)
        if ize:
            for stem in IZE:
                if stem[:-3] in s:
                    s = s.replace(stem, stem[:-3] + "ize").replace(stem[:-3] + "ised", stem[:-3] + "ized")
        if tag_rate and s.endswith(".") and rng.random() < tag_rate:
            tag = rng.choice(tags).format(n=rng.randint(1, 480), d=rng.randint(1, 9), name=rng.choice(names))
            s = s[:-1] + tag + ("" if tag.endswith("!") else ".")
        if marker_rate and rng.random() < marker_rate:
            first, _, rest = s.partition(" ")
            if first in LOWER_STARTS and rest:
                m = rng.choice(markers)
                s = f"{m} {first.lower() if first not in ('I',) else first} {rest}"
        return s

    return apply
