"""General-domain text about invented towns, clubs and gadgets."""

from __future__ import annotations

import random

import _data
import _style
import _world as W
from _grammar import Grammar, redraw, tidy, word_count

# Names and sentence templates (syntax of _grammar) in data/general.json.
(
    CLUBS, GADGETS, DISHES, HOBBIES, SIGHTS, NEWS, RECIPE_STEPS, RECIPE_CHAT, TRAVEL, SPORTS, REVIEW,
    WEATHER, HOBBY,
) = _data.tables("general", """
    CLUBS GADGETS DISHES HOBBIES SIGHTS NEWS RECIPE_STEPS RECIPE_CHAT TRAVEL SPORTS REVIEW WEATHER HOBBY
""")


def slots() -> dict:
    s = W.base_slots()
    s.update({
        "town2": W.town,
        "street": lambda r: f"{r.choice(W.STREET_NAMES)} {r.choice(W.STREET_KINDS)}",
        "day": ["Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday"],
        "river": ["Vell", "Ostra", "Marrow", "Tillen", "Corl"],
        "price": lambda r: f"{r.randint(3, 180)} {W.CURRENCY}",
        "club2": CLUBS, "score": lambda r: f"{r.randint(0, 4)}-{r.randint(0, 4)}",
        "crowd": lambda r: f"{r.randint(3, 90) * 100:,}", "gadget": GADGETS,
        "stars": ["2", "3", "3.5", "4", "4.5", "5"], "sight": SIGHTS, "dish": DISHES,
        "temp_c": lambda r: str(r.randint(-2, 29)), "low_c": lambda r: str(r.randint(-6, 12)),
        "time": lambda r: f"{r.randint(5, 9)}:{r.randint(0, 59):02d}",
        "time2": lambda r: f"{r.randint(16, 21)}:{r.randint(0, 59):02d}",
        "minute": lambda r: str(r.randint(5, 89)),
        "where": ["spare room", "shed", "kitchen table", "garage", "hallway"],
        "feature": ["pairing", "the timer", "charging", "cleaning", "the night mode", "updates"],
        "part": ["lid", "hinge", "charging port", "buttons", "strap", "handle"],
        "oldgadget": ["Brevik", "Tallow", "Orrick", "Vexa", "Cobbet", "no-name one"],
        "ml": lambda r: str(r.randint(1, 12) * 50),
        "ing": ["butter", "hazelnuts", "oats", "smoked paprika", "fennel seeds", "grated apple",
                "brown sugar", "sage leaves", "crème fraîche", "sunflower seeds", "lemon zest",
                "sliced mushrooms", "chopped dates", "pearl barley", "cumin seeds"],
        "tool": ["set of files", "soldering iron", "spotting scope", "proving basket", "trowel",
                 "pair of needles", "bone folder", "tyre lever set", "wetsuit", "smoker", "wheel", "compass"],
    })
    return s


GENRES = {
    "local_news": (NEWS, ["{town}: [council|residents|shops] [at odds over|welcome|react to] [new plans|changes|the decision]",
                          "Local news - {town}", "{town} Gazette, {date}", ""]),
    "recipe": (RECIPE_STEPS, ["{dish_cap}", "Recipe: {dish}", "How to make {dish}", "{dish_cap} (serves [four|six])"]),
    "travel": (TRAVEL, ["A weekend in {town}", "{town} travel notes", "Travel diary: {town} and {town2}", ""]),
    "sports": (SPORTS, ["{club} report", "Match report: {club} v {club2}", "Sport round-up", ""]),
    "product_review": (REVIEW, ["Review: {gadget}", "{gadget} - my verdict", "Customer review", ""]),
    "weather": (WEATHER, ["Weather for {town}", "Forecast", "{town} weather, {date}"]),
    "hobby_blog": (HOBBY, ["Notes from the [workbench|allotment|club]", "{hobby_cap}: an update", "Blog post, {date}", ""]),
}


def make_document(g: Grammar, genre: str, target: int | None = None,
                  lo: int = 60, hi: int = 300) -> str:
    """One document of ``genre`` with between lo and hi words."""
    return redraw(_make_once, g, genre, target, lo, hi)


def _make_once(g: Grammar, genre: str, target: int | None) -> str:
    rng = g.rng
    dish, hobby = rng.choice(DISHES), rng.choice(HOBBIES)
    g.ctx = {"town": W.town(rng), "club": rng.choice(CLUBS), "dish": dish,
             "dish_cap": dish.capitalize(), "hobby": hobby, "hobby_cap": hobby.capitalize(),
             "gadget": rng.choice(GADGETS)}
    target = target or int(60 + 240 * rng.betavariate(1.0, 4.8))
    g.style = _style.author(rng, "general", formal=genre in ("local_news", "weather"))
    pool, titles = GENRES[genre]
    title = tidy(g.x(rng.choice(titles)))
    sents: list[str] = []
    if genre == "recipe":
        chat = g.sample(RECIPE_CHAT, rng.randint(1, 3))
        picked = sorted(rng.sample(range(len(pool)), rng.randint(5, 10)))
        steps = [g.s(pool[i]) for i in picked]
        ingredients = "Ingredients: " + ", ".join(rng.sample(
            ["2 onions", "a knob of butter", "400 g tinned tomatoes", "1 litre stock", "3 eggs",
             "200 g flour", "a bunch of parsley", "150 ml cream", "2 cloves garlic", "500 g squash",
             "100 g oats", "a pinch of salt", "250 g lentils", "1 tsp cumin"], rng.randint(4, 8)))
        numbered = rng.random() < 0.5
        body = "\n".join(f"{i}. {s}" if numbered else s for i, s in enumerate(steps, 1))
        text = "\n\n".join([title, " ".join(chat), ingredients, body])
        return text
    words = 0
    for t in rng.sample(pool, len(pool)):
        if words >= target:
            break
        s = g.s(t)
        sents.append(s)
        words += word_count(s)
    paras, i = [], 0
    while i < len(sents):
        k = rng.choice([1, 2, 3, 3, 4])
        paras.append(" ".join(sents[i:i + k]))
        i += k
    return "\n\n".join(p for p in [title] + paras if p)


def new_grammar(rng: random.Random) -> Grammar:
    return Grammar(rng, slots())
