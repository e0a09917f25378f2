"""Language identification: other Latin-script languages are told apart from the expected one on short texts."""

from __future__ import annotations

import pytest

from adapt.config.prepare import PrepareJob
from adapt.corpus import language

# Invented one- or two-sentence texts with a legal or clinical flavour, written for this test (the same facts in
# each language, so that the vocabulary of the domain cannot give the language away).
SHORT_TEXTS = {
    "en": ["The tenant shall pay the rent on the first day of each month.",
           "The patient was admitted with chest pain and discharged after two days.",
           "The court dismissed the appeal and ordered the claimant to pay costs.",
           "Blood pressure remained stable overnight; continue the current dose.",
           "This agreement may be terminated by either party with thirty days' notice.",
           "No known drug allergies. Follow-up appointment in six weeks.",
           "The defendant denies every allegation in the statement of claim.",
           "She reports mild nausea since starting the new medication."],
    "es": ["El arrendatario deberá pagar la renta el primer día de cada mes.",
           "La paciente ingresó por dolor torácico y fue dada de alta a los dos días.",
           "El tribunal desestimó el recurso y condenó en costas a la parte actora.",
           "La tensión arterial se mantuvo estable durante la noche; mantener la dosis actual.",
           "Cualquiera de las partes podrá resolver este contrato con un preaviso de treinta días.",
           "Sin alergias medicamentosas conocidas. Revisión en consulta dentro de seis semanas.",
           "El demandado niega todos los hechos alegados en la demanda.",
           "Refiere náuseas leves desde que empezó el nuevo tratamiento."],
    "fr": ["Le locataire doit payer le loyer le premier jour de chaque mois.",
           "La patiente a été hospitalisée pour une douleur thoracique et est sortie après deux jours.",
           "La cour a rejeté l'appel et condamné le demandeur aux dépens.",
           "La tension artérielle est restée stable pendant la nuit ; poursuivre la dose actuelle.",
           "Chacune des parties peut résilier le présent contrat avec un préavis de trente jours.",
           "Aucune allergie médicamenteuse connue. Consultation de suivi dans six semaines.",
           "Le défendeur conteste l'ensemble des faits allégués dans l'assignation.",
           "Elle signale de légères nausées depuis le début du nouveau traitement."],
    "pt": ["O inquilino deve pagar a renda no primeiro dia de cada mês.",
           "A doente foi internada com dor torácica e teve alta ao fim de dois dias.",
           "O tribunal negou provimento ao recurso e condenou o autor nas custas.",
           "A pressão arterial manteve-se estável durante a noite; manter a dose atual.",
           "Qualquer das partes pode rescindir este contrato com um aviso prévio de trinta dias.",
           "Sem alergias medicamentosas conhecidas. Consulta de seguimento dentro de seis semanas.",
           "O réu nega todos os factos alegados na petição inicial.",
           "Refere náuseas ligeiras desde que começou a nova medicação."],
    "it": ["Il conduttore deve pagare il canone il primo giorno di ogni mese.",
           "La paziente è stata ricoverata per dolore toracico e dimessa dopo due giorni.",
           "La corte ha respinto l'appello e condannato l'attore al pagamento delle spese.",
           "La pressione arteriosa è rimasta stabile durante la notte; proseguire con la dose attuale.",
           "Ciascuna delle parti può recedere dal presente contratto con un preavviso di trenta giorni.",
           "Nessuna allergia nota ai farmaci. Visita di controllo tra sei settimane.",
           "Il convenuto contesta tutti i fatti esposti nell'atto di citazione.",
           "Riferisce una lieve nausea da quando ha iniziato la nuova terapia."],
    "ca": ["L'arrendatari ha de pagar el lloguer el primer dia de cada mes.",
           "La pacient va ingressar per dolor toràcic i va rebre l'alta al cap de dos dies.",
           "El tribunal va desestimar el recurs i va condemnar la part actora a pagar les costes.",
           "La pressió arterial es va mantenir estable durant la nit; cal mantenir la dosi actual.",
           "Qualsevol de les parts pot resoldre aquest contracte amb un preavís de trenta dies.",
           "No té al·lèrgies conegudes a medicaments. Visita de control d'aquí a sis setmanes.",
           "La part demandada nega tots els fets al·legats a la demanda.",
           "Explica que té nàusees lleus des que va començar el nou tractament."],
    "de": ["Der Mieter hat die Miete am ersten Tag jedes Monats zu zahlen.",
           "Die Patientin wurde mit Brustschmerzen aufgenommen und nach zwei Tagen entlassen.",
           "Das Gericht wies die Berufung zurück und legte dem Kläger die Kosten auf.",
           "Der Blutdruck blieb über Nacht stabil; die aktuelle Dosis beibehalten.",
           "Jede Partei kann diesen Vertrag mit einer Frist von dreißig Tagen kündigen.",
           "Keine bekannten Arzneimittelallergien. Kontrolltermin in sechs Wochen.",
           "Der Beklagte bestreitet sämtliche in der Klageschrift vorgetragenen Tatsachen.",
           "Sie berichtet über leichte Übelkeit seit Beginn der neuen Medikation."],
}


@pytest.fixture(scope="module")
def identifier():
    return language.LanguageIdentifier(PrepareJob().language_id.sample_chars)


def test_the_most_probable_language_of_each_short_text_is_its_own(identifier):
    wrong = [(lang, identifier.identify(t, "en").top, t) for lang, texts in SHORT_TEXTS.items() for t in texts
             if identifier.identify(t, "en").top != lang]
    assert not wrong


@pytest.mark.parametrize("expected", ["en", "es"])
def test_default_threshold_keeps_the_expected_language_and_rejects_the_others(identifier, expected):
    threshold = PrepareJob().language_id.min_probability
    for lang, texts in SHORT_TEXTS.items():
        for t in texts:
            verdict = identifier.identify(t, expected)
            assert verdict.is_other_language(expected, threshold) == (lang != expected), (lang, verdict, t)


@pytest.mark.parametrize("expected", ["en", "es"])
def test_the_function_word_precheck_never_passes_another_language(identifier, expected):
    passed = {lang: sum(identifier.is_clearly(t, expected) for t in texts) for lang, texts in SHORT_TEXTS.items()}
    assert all(n == 0 for lang, n in passed.items() if lang != expected), passed
    assert passed[expected] >= len(SHORT_TEXTS[expected]) // 2  # and it does spare the classifier


def test_upper_case_and_empty_text(identifier):
    assert identifier.identify("EL TRIBUNAL DESESTIMÓ EL RECURSO Y CONDENÓ EN COSTAS A LA PARTE ACTORA.", "es").top == "es"
    empty = identifier.identify("", "en")
    assert not empty.is_other_language("en", 0.5)  # no evidence for another language: left to later filters
    # a keyword list has no clear language either
    assert not identifier.identify("rent cheap deposit " * 20, "en").is_other_language("en", 0.5)


def _filter(min_probability: float, texts: dict[str, str]):
    from adapt.corpus.docwork import WorkState, filter_chunk, init_worker

    cfg = PrepareJob(inputs=["unused"])
    cfg.clean.min_words = 3
    cfg.language_id.min_probability = min_probability
    init_worker(WorkState(cfg))
    docs = [{"id": k, "source": "s", "markup_share": 0.0, "text": v, "words": len(v.split())}
            for k, v in texts.items()]
    return filter_chunk(docs)


def test_prepare_removes_documents_in_another_language_with_a_reason():
    texts = {lang: " ".join(SHORT_TEXTS[lang][:2]) for lang in ("en", "fr", "pt", "it", "ca")}
    res = _filter(0.5, texts)
    assert [d["id"] for d in res.kept] == ["en"]
    removed = {r["id"]: r for r in res.removed}
    assert set(removed) == {"fr", "pt", "it", "ca"}
    assert all(r["reason"] == "wrong_language" for r in removed.values())
    assert removed["fr"]["detail"].startswith("identified as fr")
    assert res.reached["language"] == 1 and res.wrong_languages == {"fr": 1, "pt": 1, "it": 1, "ca": 1}
    assert res.counts["language_prechecked"] == 1  # the English one
    off = _filter(0.0, texts)  # 0 switches the check off
    assert len(off.kept) == 5 and off.reached["language"] == 5
