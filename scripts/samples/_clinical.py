"""Clinical documents of the (invented) Orlindhal General Infirmary."""

from __future__ import annotations

import random

import _data
import _style
import _world as W
from _grammar import Grammar, redraw, tidy, word_count

# Phrase pools: templates in the syntax of _grammar ([a|b] alternatives, [?a] optional parts, {slot}
# values), in data/clinical_phrases.json.  Every name, place and statute is invented.
(
    SPECIALTIES, SPEC_WEIGHTS, SPEC_NAME, PC, HISTORY, EXAM, INVEST, PLAN, DIAGNOSES, NURSING,
    NURSING_SPEC, RADIOLOGY, TECHNIQUE, TECH_XRAY, INCIDENTAL, REFERRAL_OPEN, REFERRAL_FIRST,
    REFERRAL_LAST, REFERRAL_BODY, REFERRAL_CLOSE, CLINIC_OPEN, CLINIC_FIRST, CLINIC_LAST,
    CLINIC_BODY, CLINIC_CLOSE, PROCEDURES, MEDREV_INTRO, MEDREV_BODY, TRIAGE_CATS, SPEC_WARDS,
) = _data.tables("clinical_phrases", """
    SPECIALTIES SPEC_WEIGHTS SPEC_NAME PC HISTORY EXAM INVEST PLAN DIAGNOSES NURSING NURSING_SPEC
    RADIOLOGY TECHNIQUE TECH_XRAY INCIDENTAL REFERRAL_OPEN REFERRAL_FIRST REFERRAL_LAST REFERRAL_BODY
    REFERRAL_CLOSE CLINIC_OPEN CLINIC_FIRST CLINIC_LAST CLINIC_BODY CLINIC_CLOSE PROCEDURES
    MEDREV_INTRO MEDREV_BODY TRIAGE_CATS SPEC_WARDS
""")


def _ward(rng: random.Random, spec: str) -> str:
    if rng.random() < 0.75:
        return rng.choice(SPEC_WARDS[spec])
    return rng.choice(["Ward 7 (Acute Medical Unit)", "the Clinical Decisions Unit"] + W.WARDS[:3])


def _dose(rng: random.Random) -> str:
    return f"{rng.choice([1.25, 2.5, 5, 10, 20, 25, 40, 50, 80, 100, 200, 500])} mg {rng.choice(['OD', 'BD', 'TDS', 'nocte', 'once daily', 'twice daily'])}"


def slots() -> dict:
    s = W.base_slots()
    rnd = lambda lo, hi: (lambda r: str(r.randint(lo, hi)))
    s.update({
        "hr": rnd(58, 104), "hr_fast": rnd(108, 158), "rr": rnd(12, 22), "rr_high": rnd(24, 34),
        "spo2": rnd(93, 99), "spo2_low": rnd(82, 91),
        "bp": lambda r: f"{r.randint(104, 176)}/{r.randint(58, 98)}",
        "bp_low": lambda r: f"{r.randint(78, 98)}/{r.randint(40, 58)}",
        "temp": lambda r: f"{r.uniform(36.1, 37.6):.1f}", "temp_high": lambda r: f"{r.uniform(37.9, 39.6):.1f}",
        "news": rnd(0, 7), "gcs": lambda r: r.choice(["15/15", "14/15", "13/15", "E3V4M6", "11/15"]),
        "trop": rnd(9, 80), "trop2": rnd(90, 2400), "ef": rnd(22, 62), "bnp": rnd(180, 4200),
        "fev1": rnd(28, 78), "ratio": lambda r: f"0.{r.randint(38, 69)}",
        "ph": lambda r: f"7.{r.randint(24, 44)}", "pco2": lambda r: f"{r.uniform(4.2, 9.4):.1f}",
        "po2": lambda r: f"{r.uniform(6.8, 11.9):.1f}", "crp": rnd(4, 310), "wcc": lambda r: f"{r.uniform(4.1, 24.0):.1f}",
        "glucose": lambda r: f"{r.uniform(3.4, 19.8):.1f}", "hb_low": rnd(62, 104), "urea": lambda r: f"{r.uniform(6.2, 28.0):.1f}",
        "gbs": rnd(3, 14), "bili": rnd(12, 240), "alt": rnd(18, 620), "alp": rnd(70, 890), "alb": rnd(21, 42),
        "calpro": rnd(40, 2400), "na": rnd(122, 146), "k": lambda r: f"{r.uniform(3.1, 5.9):.1f}", "creat": rnd(58, 310),
        "egfr": rnd(18, 88), "pef": rnd(150, 420), "pef_pct": rnd(35, 80), "curb": rnd(0, 4), "sev": rnd(6, 19),
        "sev2": rnd(1, 5), "chads": rnd(1, 6), "kg": lambda r: f"{r.uniform(1.5, 8.5):.1f}", "weight": rnd(48, 124),
        "amt_score": rnd(2, 9), "units": rnd(14, 120), "young_age": rnd(41, 58), "pain": rnd(2, 9),
        "ml": lambda r: str(r.randint(3, 40) * 25), "girth": rnd(84, 128), "ctr": lambda r: f"0.{r.randint(55, 68)}",
        "calc": rnd(0, 1400), "spleen": lambda r: f"{r.uniform(12.5, 18.0):.1f}", "wall": rnd(2, 9), "cbd": rnd(4, 14),
        "nmeds": rnd(9, 16), "nmeds2": rnd(4, 8), "acb": rnd(1, 6), "day_n": rnd(2, 5),
        "n_small2": rnd(2, 5), "time": lambda r: f"{r.randint(0, 23):02d}:{r.choice(['05', '20', '35', '50', '00'])}",
        "day": lambda r: r.choice(["Monday", "Tuesday", "the weekend", "Friday", "yesterday"]),
        "dose": _dose, "dose2": _dose,
        "stream": ["majors", "minors", "resus", "ambulatory care", "same-day emergency care", "the medical team",
                   "the surgical assessment unit", "the stroke team", "the chest pain pathway"],
        "grace": rnd(88, 190),
        "level": ["C5/6", "C6/7", "L4/5", "L5/S1", "T8-T10"],
        "exam_kind": ["CT", "MRI", "ultrasound", "angiographic"],
        "inv_short": ["scan", "blood test", "ECG", "endoscopy", "echo", "MRI"],
        "relative": ["daughter", "son", "husband", "wife", "partner", "niece", "brother"],
        "exam_prev": ["a chest X-ray", "CT", "an MRI", "ultrasound"],
        "hosp": W.HOSPITALS, "ward": W.WARDS, "gp": W.GP_PRACTICES,
        "drug_prn": ["seprafen", "antemezine", "tramolene", "dormaleen", "calvexa"],
        "odrug": W.DRUGS["general"],
        "proc": PROCEDURES,
        "blood_result": ["a haemoglobin of {hb_low}", "a CRP of {crp}", "an ALT of {alt}", "normal renal function",
                         "a sodium of {na}", "a raised BNP of {bnp}", "a normal full blood count"],
    })
    return s


def _context(rng: random.Random, spec: str) -> dict:
    female = rng.random() < 0.5
    pool = [n for n in W.FIRST_NAMES if (n in W.FEMALE) == female]
    pt = f"{rng.choice(pool)} {W.surname(rng)}"
    age = rng.randint(19, 94) if spec != "elderly" else rng.randint(76, 99)
    ctx = {
        "spec": spec, "spec_name": SPEC_NAME[spec], "pt": pt,
        "pt_t": f"{'Mrs' if female and rng.random() < 0.5 else 'Ms' if female else 'Mr'} {pt.split(' ')[1]}",
        "age": str(age), "sex1": "F" if female else "M",
        "sexw": ("woman" if female else "man") if rng.random() < 0.6 else ("lady" if female else "gentleman"),
        "He": "She" if female else "He", "he": "she" if female else "he",
        "his": "her" if female else "his", "him": "her" if female else "him",
        "His": "Her" if female else "His",
        "gp_doc": W.person(rng), "gp_doc_first": W.first_name(rng), "cons": W.person(rng), "mrn": W.hospital_number(rng),
        "pc": PC[spec], "pc2": PC[rng.choice(SPECIALTIES[:4]) if rng.random() < 0.25 else spec],
        "pc_short": ["chest pain", "SOB", "nausea", "headache", "abdo pain", "dizziness", "pain"],
    }
    drugs = W.DRUGS.get(spec, W.DRUGS["general"])
    ctx["drug"] = drugs + W.DRUGS["general"][:2]
    ctx["drug2"] = W.DRUGS["general"]
    ctx["cdrug"], ctx["cdrug2"] = W.DRUGS["cardiology"], W.DRUGS["cardiology"]
    ctx["rdrug"], ctx["rdrug2"] = W.DRUGS["respiratory"], W.DRUGS["respiratory"]
    ctx["ndrug"], ctx["ndrug2"] = W.DRUGS["neurology"], W.DRUGS["neurology"]
    ctx["gdrug"], ctx["gdrug2"] = W.DRUGS["gastroenterology"], W.DRUGS["gastroenterology"]
    return ctx


def _length(rng: random.Random, lo: int = 80, hi: int = 400) -> int:
    return int(lo + (hi - lo) * rng.betavariate(1.2, 4.3))


def _upto(g: Grammar, pools: list[list[str]], target: int) -> list[str]:
    out: list[str] = []
    words = 0
    queue = [t for pool in pools for t in g.rng.sample(pool, len(pool))]
    for t in queue:
        if words >= target:
            break
        s = g.s(t)
        out.append(s)
        words += word_count(s)
    return out


def _spec_pools(spec: str) -> list[list[str]]:
    return [HISTORY[spec], EXAM[spec], INVEST[spec], PLAN[spec]]


# ---------------------------------------------------------------------------
def discharge_summary(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    spec = c["spec"]
    adm = W.rand_date(rng, 2018, 2024)
    los = rng.randint(1, 21)
    fmt = rng.choice([0, 1, 4])
    dates = (W.fmt_date(adm, fmt), W.fmt_date(adm.fromordinal(adm.toordinal() + los), fmt))
    caps = rng.random() < 0.5
    h = (lambda t: t.upper()) if caps else (lambda t: t)
    parts = [g.x(rng.choice(["DISCHARGE SUMMARY - {hosp}", "Discharge summary", "{hosp}\n[Inpatient discharge letter|Discharge notification|Electronic discharge summary|Transfer of care letter]", "[Discharge letter|Summary of admission] - {spec_name}"]))]
    parts.append(f"{h('Patient')}: {c['pt']}  {h('Hosp no')}: {c['mrn']}\n"
                 f"{h('Admitted')}: {dates[0]}  {h('Discharged')}: {dates[1]}\n"
                 f"{h('Ward')}: {_ward(rng, spec)}  {h('Consultant')}: Dr {c['cons'].split(' ')[1]}")
    diag = rng.sample(DIAGNOSES[spec], rng.randint(1, 2))
    parts.append(f"{h('Diagnosis')}: " + "; ".join(diag))
    parts.append(f"{h('Presenting complaint')}: " + g.s("{pc}") + ".")
    budget = max(30, target - 70)
    hist = _upto(g, [HISTORY[spec]], budget * 0.3)
    inv = _upto(g, [INVEST[spec], EXAM[spec]], budget * 0.35)
    plan = _upto(g, [PLAN[spec]], budget * 0.25)
    parts.append(f"{h('History')}: " + " ".join(hist))
    parts.append(f"{h('Investigations')}:\n" + "\n".join(("- " if rng.random() < 0.5 else "") + s for s in inv))
    parts.append(f"{h('Progress')}: " + " ".join(plan))
    meds = rng.sample(W.DRUGS.get(spec, W.DRUGS["general"]), rng.randint(1, 3))
    parts.append(f"{h('Medications on discharge')}:\n" + "\n".join(f"{m} {_dose(rng)}" for m in meds))
    parts.append(f"{h('Follow-up')}: " + g.pick([
        "{spec_name} clinic in [six|eight|twelve] weeks.", "GP to review in one week and recheck bloods.",
        "No hospital follow-up required.", "Telephone review by the specialist nurse in two weeks.",
        "GP please [repeat U&E in one week|titrate {drug} as tolerated|review blood pressure]."]))
    return "\n\n".join(parts)


def nursing_note(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    spec = c["spec"]
    head = g.x(rng.choice(["Nursing note - {ward} - {date}", "NURSING EVALUATION ({date}, [day|night] shift)",
                           "{ward} / bed {n} / {pt}", "Shift report {date}"]))
    minute = rng.choice([7 * 60 + 30, 19 * 60 + 30, 8 * 60, 20 * 60]) + rng.randint(0, 40)
    colon = rng.random() < 0.4
    entries = []
    pool = rng.sample(NURSING + NURSING_SPEC[spec], len(NURSING) + len(NURSING_SPEC[spec]))
    words = 0
    for t in pool:
        if words > target - 10:
            break
        s = g.s(t)
        entries.append(s)
        words += word_count(s)
    stamps = []
    for _ in entries:
        minute = (minute + rng.randint(10, 95)) % 1440
        stamps.append(f"{minute // 60:02d}{':' if colon else ''}{minute % 60:02d}")
    entries = [e.replace(e.split(" ")[0], stamps[i], 1) for i, e in enumerate(entries)]
    style = rng.random()
    if style < 0.3:
        entries = [e.split(" ", 1)[1] for e in entries]  # no time stamps
    signoff = g.x(rng.choice(["{first} {surname_i}, RN", "Signed: {surname_i} (staff nurse)", "- {first} (HCA)", "RN {surname}"]))
    return head + "\n" + "\n".join(entries) + "\n" + signoff


def radiology_report(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    exam, findings, impressions = rng.choice(RADIOLOGY[c["spec"]])
    parts = [g.s(exam) if rng.random() < 0.6 else f"Examination: {g.s(exam)}"]
    parts.append(g.x(rng.choice(["Clinical details: {pc}.", "Clinical information: query {dx}. {pc}.",
                                 "History: {age}{sex1}, {pc}.", "Indication: {pc}; {dx} to be excluded."])))
    if rng.random() < 0.4:
        parts.append(g.x("Comparison: [none available|{date}|previous imaging of {date}|{exam_prev} from {year}]."))
    fnd = [g.s(f) for f in rng.sample(findings, rng.randint(2, len(findings)))]
    parts.append(("FINDINGS:\n" if rng.random() < 0.5 else "Findings: ") + " ".join(fnd))
    parts.append(("IMPRESSION:\n" if rng.random() < 0.5 else "Conclusion: ") + g.s(rng.choice(impressions)))
    parts.insert(2, g.pick(TECH_XRAY if "X-RAY" in exam else TECHNIQUE))
    if word_count("\n".join(parts)) < target * 0.7:
        parts.insert(2, rng.choice(["Further history: ", "Additional details: ", "Clinical notes: "])
                     + " ".join(g.sample(HISTORY[c["spec"]], rng.randint(1, 3))))
    if word_count("\n".join(parts)) < target:
        fnd_idx = next(i for i, p in enumerate(parts) if p.lower().startswith("findings"))
        parts[fnd_idx] += " " + " ".join(g.sample(INCIDENTAL, rng.randint(1, 3)))
    parts.append(g.x(rng.choice(["Reported by Dr {surname}, Consultant Radiologist, {date}.",
                                 "Dr {first} {surname} (ST4 Radiology) / verified Dr {surname}",
                                 "Electronically signed: {surname_i}, {date} {time}"])))
    return "\n\n".join(parts)


def referral_letter(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    head = g.x(rng.choice(["{gp}\n{date}", "URGENT REFERRAL\n{gp}", "{date}", "Referral to {spec_name}, {hosp}"]))
    body = [g.pick(REFERRAL_FIRST)]
    body += _upto(g, [REFERRAL_BODY, HISTORY[c["spec"]][:rng.randint(2, 5)], EXAM[c["spec"]][:2]], target - 60)
    body += g.sample(REFERRAL_LAST, rng.randint(1, 2))
    pmh = ""
    if rng.random() < 0.5:
        pmh = "PMH: " + ", ".join(rng.sample(["hypertension", "type 2 diabetes", "asthma", "hypothyroidism",
                                               "osteoarthritis", "depression", "CKD stage 3", "gout"], rng.randint(1, 3)))
        pmh += "\nDH: " + ", ".join(rng.sample(W.DRUGS["general"], rng.randint(1, 3)))
    return "\n\n".join(p for p in [head, g.x(rng.choice(REFERRAL_OPEN)), _paras(rng, body), pmh,
                                   g.x(rng.choice(REFERRAL_CLOSE))] if p)


def clinic_letter(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    head = g.x(rng.choice(["{spec_name} Outpatients, {hosp}\nClinic date: {date}",
                           "Dictated {date}, typed {date}", "{hosp} - {spec_name}"]))
    diag = "Diagnosis: " + "; ".join(rng.sample(DIAGNOSES[c["spec"]], rng.randint(1, 2)))
    spec = c["spec"]
    body = [g.pick(CLINIC_FIRST)] + _upto(g, [HISTORY[spec][:rng.randint(1, 4)], INVEST[spec][:rng.randint(1, 3)],
                                            CLINIC_BODY, PLAN[spec][:rng.randint(1, 3)]], target - 60)
    body += g.sample(CLINIC_LAST, rng.randint(1, 2))
    return "\n\n".join([head, g.x(rng.choice(CLINIC_OPEN)), diag if rng.random() < 0.6 else "",
                        _paras(rng, body), g.x(rng.choice(CLINIC_CLOSE))]).replace("\n\n\n\n", "\n\n")


def medication_review(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    head = g.x(rng.choice(MEDREV_INTRO))
    meds = rng.sample(W.DRUGS.get(c["spec"], W.DRUGS["general"]) + W.DRUGS["general"], rng.randint(3, 7))
    table = "Current medicines:\n" + "\n".join(f"{i}. {m} {_dose(rng)}" for i, m in enumerate(meds, 1))
    body = _upto(g, [MEDREV_BODY], target - 40 - 4 * len(meds))
    if rng.random() < 0.5:
        body = ["- " + b for b in body]
        text = "\n".join(body)
    else:
        text = _paras(rng, body)
    return "\n\n".join([head, table, text])


def triage_note(g: Grammar, target: int) -> str:
    rng, c = g.rng, g.ctx
    spec = c["spec"]
    lines = [g.x(rng.choice(["ED TRIAGE - {hosp}", "[Emergency Department triage note|Initial assessment (ED)|Front-door triage|Ambulance triage] - {hosp}", "TRIAGE {date} {time}", "Triage record, {hosp}, {date}"]))]
    lines.append(g.x("Arrival: [walk-in|ambulance|GP referral|brought by family]  Time: {time}"))
    lines.append("PC: " + g.s("{pc}"))
    lines.append(g.x("Obs: HR {hr} BP {bp} RR {rr} SpO2 {spo2}% T {temp}[ GCS {gcs}|]"))
    extra = _upto(g, [HISTORY[spec][:4], EXAM[spec][:3]], min(70, max(20, target - 60)))
    lines.append("Hx: " + " ".join(extra))
    cat = rng.choice(TRIAGE_CATS)
    lines.append(g.x(rng.choice([
        f"Triage category: {cat}. Stream: {{stream}}. Triage nurse: {{surname_i}}.",
        f"Cat {cat.split(' ')[0]}, streamed to {{stream}} at {{time}} ({{surname_i}}).",
        f"Priority {cat}; to {{stream}}[ - bed {{n}}|]. [Seen by|Triaged by] {{surname_i}}.",
        f"Category {cat} - [awaiting|for] {{stream}} [review|assessment|doctor][, {{n}} in the queue|]."])))
    return "\n".join(lines)


def _paras(rng: random.Random, sents: list[str]) -> str:
    out, i = [], 0
    while i < len(sents):
        k = rng.choice([1, 2, 2, 3, 3, 4])
        out.append(" ".join(sents[i:i + k]))
        i += k
    return "\n\n".join(out)


GENRES = {
    "discharge_summary": discharge_summary,
    "nursing_note": nursing_note,
    "radiology_report": radiology_report,
    "referral_letter": referral_letter,
    "clinic_letter": clinic_letter,
    "medication_review": medication_review,
    "triage_note": triage_note,
}


def make_document(g: Grammar, genre: str, target: int | None = None,
                  lo: int = 80, hi: int = 400) -> str:
    """One document of ``genre`` with between lo and hi words."""
    return redraw(_make_once, g, genre, target, lo, hi)


def _make_once(g: Grammar, genre: str, target: int | None) -> str:
    rng = g.rng
    spec = rng.choices(SPECIALTIES, SPEC_WEIGHTS)[0]
    g.ctx = _context(rng, spec)
    g.ctx["dx"] = DIAGNOSES[spec]
    year = rng.randint(2017, 2024)
    g.ctx["date"] = lambda r: W.date_str(r, year - 1, year)
    g.ctx["year"] = lambda r: str(r.randint(year - 8, year - 1))
    target = target or _length(rng)
    g.style = _style.author(rng, "clinical", formal=genre in ("clinic_letter", "referral_letter", "radiology_report"))
    text = GENRES[genre](g, target)
    return "\n".join(tidy(line) if line.strip() else "" for line in text.split("\n"))


def new_grammar(rng: random.Random) -> Grammar:
    s = slots()
    s["surname_i"] = lambda r: f"{r.choice(W.FIRST_NAMES)[0]}. {r.choice(W.SURNAMES)}"
    return Grammar(rng, s)
