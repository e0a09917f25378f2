"""Short stop-word lists (function words) for English and Spanish, written for this project.

Used for the stop-word share of a document (a quality feature: running prose has many function words, keyword
spam and tables have few) and to leave function words out of the top-unigram overlap.

DISTINCTIVE holds frequent function words of each language that are not words of the other Latin-script
languages the language check tells apart (fr, pt, it, ca, gl, de, nl and en/es; chosen by us from the spelling of
those languages, so "a", "in", "on", "as", "que", "en", "del", "con" are left out). Running text with many of them
is in that language without asking the classifier.
"""

from __future__ import annotations

STOPWORDS = {
    "en": frozenset("""
        a about above after again against all am an and any are as at be because been before being below
        between both but by can could did do does doing down during each few for from further had has have
        having he her here hers herself him himself his how i if in into is it its itself just me more most
        my myself no nor not now of off on once only or other our ours ourselves out over own same she should
        so some such than that the their theirs them themselves then there these they this those through to
        too under until up upon very was we were what when where which while who whom why will with would you
        your yours yourself yourselves shall may might must also per within without any such whether
    """.split()),
    "es": frozenset("""
        a al algo algunas algunos ante antes como con contra cual cuando de del desde donde durante e el ella
        ellas ellos en entre era eran es esa esas ese eso esos esta estaba estado estas este esto estos fue
        fueron ha han hasta hay la las le les lo los más me mi mis mucho muy nada ni no nos nosotros o os otra
        otras otro otros para pero poco por porque que quien quienes se sea ser si sido sin sobre son su sus
        también tanto te tiene tienen todo todos tu tus un una unas uno unos usted ustedes y ya yo él ésta
        éste sí según cada está están había habían hacia mismo misma
    """.split()),
}

DISTINCTIVE = {
    "en": frozenset("""
        the and of to that with for this which from by at be been were are has have had it its not shall would
        should will they their there these those who when what any such upon
    """.split()),
    "es": frozenset("""
        los las y muy pero fue fueron hay sus cuando también según donde él ellos ellas nosotros usted ustedes
        está están había habían mismo
    """.split()),
}
