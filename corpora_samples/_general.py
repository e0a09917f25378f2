"""General-domain text about invented towns, clubs and gadgets."""

from __future__ import annotations

import random

import _style
import _world as W
from _grammar import Grammar, redraw, tidy, word_count

CLUBS = ["Ostrelby Rovers", "Vennickford Athletic", "Brasselmoor Harriers", "Tillenhyde Wanderers",
         "Saldermere Town", "Pennagrave United", "Quistowe Albion", "Hollerdyke Mariners",
         "Lorrimouth Kestrels", "Carrowvane City", "Ambreth Foresters", "Yselby Swifts"]
GADGETS = ["Lumora K3 smart lamp", "Brevik Aero earbuds", "Tallow Pro kettle", "Quillwave e-reader",
           "Nimbra 5 fitness band", "Orrick HX robot vacuum", "Sennet Mini projector",
           "Parlo Dash camera", "Vexa Home speaker", "Cobbet air fryer", "Glimmet 2 action camera",
           "Harbet & Lusk coffee grinder", "Strand S7 tablet", "Dunnock bike light"]
DISHES = ["leek and barley stew", "smoked-fish pie", "honey oat bread", "spiced lentil soup",
          "plum and almond tart", "roast squash salad", "buttermilk pancakes", "mushroom risotto",
          "lamb and apricot tagine", "cider-braised sausages", "rhubarb crumble", "herb dumplings"]
HOBBIES = ["model railways", "birdwatching", "sourdough baking", "allotment gardening",
           "amateur astronomy", "knitting", "bookbinding", "restoring old bicycles",
           "wild swimming", "beekeeping", "pottery", "orienteering"]
SIGHTS = ["the old harbour", "the covered market", "the clock tower", "the salt marshes",
          "the cathedral ruins", "the riverside walk", "the lighthouse", "the botanical garden",
          "the glassworks museum", "the hill fort", "the tram museum", "the cliff path"]

NEWS = [
    "The [library|leisure centre|post office] on {street} will change its opening hours from {date}[, the council confirmed|, following a review|].",
    "[More than|Almost|Around] {crowd} people turned out for the [spring fair|charity run|harvest supper|carnival] in {town} on {day}.",
    "A planning application for {n} new homes on land off {street} has drawn [{n} objections|strong criticism|cautious support].",
    "The {town} [lifeboat crew|fire station|mountain rescue team] was called out [twice|three times|{n} times] over the [weekend|bank holiday|past week].",
    "Work on the [new roundabout|flood defences|station car park] near {town2} is running [six weeks|two months|several weeks] behind schedule.",
    "{person}, [head teacher|landlord of the Crown and Kestrel|chair of the residents' association|a retired postman], has been [honoured|thanked|recognised] for [forty|thirty|twenty-five] years of service to {town}.",
    "A [lost|runaway] [dog|pony|parrot] was reunited with its owner after [three days|a week|an appeal on social media].",
    "Prices at the {town} market have risen by about {pct} since last {month}, traders say.",
    "The [choir|amateur dramatic society|youth orchestra] from {town} [won|took second place in|reached the final of] the regional [festival|competition] in {town2}.",
    "Residents have until {date} to respond to the consultation, which is available online and at {town} town hall.",
    "A public meeting will be held at the {town} [community centre|village hall|library] at {time} on {day}.",
    "The [river|canal|harbour] path between {town} and {town2} has reopened after [storm damage|repairs|a landslip].",
    "Residents of {town} have been asked to comment on plans for [a new footbridge|a larger car park|a community library|a cycle path along the river].",
    "The [parish|town|district] council voted [seven to four|narrowly|unanimously] on {day} to [approve|delay|reject] the proposal.",
    "Councillor {person} said the scheme would [bring much-needed visitors|ease congestion on {street}|cost far more than expected].",
    "[Shopkeepers|Parents|Dog walkers|Local cyclists] on {street} have [welcomed|criticised|mixed feelings about] the changes.",
    "The annual {town} [cheese fair|lantern parade|brass band contest|boat race] returns on {date}, organisers confirmed.",
    "Police are appealing for witnesses after [a van was stolen|a shop window was smashed|a bicycle was taken] on {street} late on {day}.",
    "A [bakery|bookshop|hardware store|café] that has traded on {street} for [forty|sixty|twenty-five] years will close at the end of the month.",
    "Owner {person} said rising rents and fewer customers had made the decision [unavoidable|heartbreaking|inevitable].",
    "The [primary school|swimming baths|community hall] is expected to reopen in {month} after repairs costing {amt}.",
    "Volunteers collected [forty|over a hundred|sixty-two] bags of litter from the banks of the river {river} at the weekend.",
    "Bus route [12|4A|31|7] will be diverted for three weeks while the road surface is replaced.",
    "A petition to save the [old mill|bandstand|village green] has gathered [1,200|more than 3,000|almost 800] signatures.",
    "\"We just want to be listened to,\" said {person}, who has lived in {town} all [her|his] life.",
    "The council said it would publish a full response [next month|after the consultation closes|in the spring].",
    "Tickets for the event cost {price} and are available from the town hall.",
    "Roadworks near {town} station caused [long queues|delays of up to an hour|frustration] for commuters on {day}.",
]
RECIPE_STEPS = [
    "Toast the {ing} in a dry pan until [golden|fragrant|lightly coloured].",
    "Add {ing} and cook for another [two|three|five] minutes, stirring often.",
    "Pour in {ml} ml of [water|milk|stock|cider] and scrape up anything stuck to the pan.",
    "Bake for [25|35|40|50|{minute}] minutes[, turning the tray halfway through| until golden| until a skewer comes out clean].",
    "Let it cool in the [tin|dish|pan] for [ten|fifteen|twenty] minutes before [turning out|cutting|serving].",
    "Blitz [half|a third|a couple of ladles] of the [mixture|soup|sauce] for a [smoother|thicker|creamier] texture[, then stir it back in|].",
    "Rub the {ing} into the flour until it looks like breadcrumbs.",
    "Preheat the oven to [180|190|200|160] degrees and grease a [deep dish|loaf tin|baking tray].",
    "Finely chop the [onion|leeks|shallots] and soften them in a little butter for [five|eight|ten] minutes.",
    "Add the [garlic|spices|herbs|{ing}] and cook for [a minute|{n_small} minutes|thirty seconds] until [fragrant|sizzling|just coloured].",
    "Stir in the [stock|tomatoes|cream|cider] and bring to a [gentle|low] simmer[ for {n} minutes|].",
    "Season well with salt and pepper, then [cover and cook|simmer uncovered|bake] for [twenty|thirty|forty-five] minutes.",
    "Meanwhile, whisk the [eggs|flour and milk|butter and sugar] until [smooth|pale and fluffy|no lumps remain].",
    "Fold in the [almonds|oats|grated cheese|chopped parsley|{ing}] and [spoon|tip|pour] the mixture into the [dish|tin|tray].",
    "Leave to rest [for ten minutes|for an hour|overnight|while you lay the table] before [serving|slicing|portioning].",
    "Serve [with|alongside] [crusty bread|a green salad|boiled potatoes|a spoonful of yoghurt|pickled {ing}|rice][ and a glass of something cold|].",
    "If the [sauce|mixture|batter] looks too [thick|dry|stiff], loosen it with a splash of [water|milk|stock].",
    "Taste and adjust the seasoning[ before serving| - it may need more {ing}| at the end|].",
    "Scatter over the [remaining herbs|toasted {ing}|reserved {ing}] and [a drizzle of oil|a little salt|some black pepper].",
]
RECIPE_CHAT = [
    "I first had {dish} at a [café|pub|friend's house] in {town} and have been tinkering with it ever since.",
    "This version uses {ing} instead of the usual [butter|cream|sugar], which makes it lighter.",
    "It's a good one for [a cold evening|a crowd|using up leftovers|a lazy Sunday].",
    "If you can find {ing} from the {town} market, it's worth the trip.",
    "This {dish} is the one my [grandmother|neighbour|aunt in {town}] made every [Sunday|winter|harvest festival].",
    "It freezes well, so I usually make a double batch.",
    "Don't skip the resting time - it really makes a difference.",
    "You can swap the [butter|cream|lamb] for [oil|yoghurt|chickpeas] if you prefer.",
    "Serves [four|six|two hungry people], and takes about [an hour|forty minutes|ninety minutes] in total.",
    "The trick, as {first} at the {town} market told me, is to [go slowly with the onions|use stale bread|buy the fish on the day].",
    "Leftovers make an excellent lunch the next day.",
    "My children, who are fussy eaters, [ask for seconds|finally approved|pick out the herbs].",
]
TRAVEL = [
    "Half an hour on the [bus|ferry|little train] brought us to {town2}, where {sight} is the main draw.",
    "[The best|Our favourite] moment was watching the sun go down over {sight} with a [pastry|flask of tea|glass of local cider].",
    "A guided tour of {sight} costs {price} and lasts about [an hour|ninety minutes|two hours].",
    "We stayed [three|two|four] nights, which felt about right.",
    "Cash is still useful in the smaller villages around {town}.",
    "The [hostel|campsite|B&B] near {sight} was [basic|full of walkers|run by a lovely couple called {first} and {first}].",
    "On the second day we hired bikes for {price} and followed the old railway line towards {town2}.",
    "The local speciality is {dish}, and every café seems to claim the best version.",
    "{month} is [quiet|busy|ideal] - fewer crowds, but some attractions keep shorter hours.",
    "I'd skip {sight} unless you have a particular interest; it was [crowded|closed for repairs|underwhelming].",
    "We arrived in {town} on a [grey|bright|windy|drizzly] {month} afternoon and headed straight for {sight}.",
    "The train from {town2} takes about [two hours|forty minutes|ninety minutes] and the views along the coast are wonderful.",
    "Our guesthouse on {street} was [simple but spotless|a little tired|charming], and breakfast was generous.",
    "Don't miss {sight}, especially early in the morning before the crowds.",
    "A day ticket for the local buses costs {price} and is good value.",
    "We ate at a small place near {sight} that served the best {dish} we had all trip.",
    "The walk from {town} to {town2} is about [twelve|eighteen|eight] kilometres and mostly flat.",
    "[Bring|Pack] [waterproofs|a warm layer|decent boots] - the weather changes quickly [out here|on the coast|around {town2}].",
    "Most shops close early on {day}, which caught us out.",
    "Locals were friendly and happy to point us towards {sight}.",
    "If you only have one day, I'd spend the morning at {sight} and the afternoon at {sight}.",
    "Parking in the old town is [difficult|expensive|limited], so we left the car at the station.",
    "The ferry back was [delayed by an hour|calm and quick|crowded but cheerful].",
    "All in all, {town} is [well worth a visit|a lovely spot for a long weekend|better than the guidebooks suggest].",
]
SPORTS = [
    "[A late goal|An own goal|A penalty] from {person} in the {minute}th minute [settled it|turned the game|rescued a point].",
    "{club} had [more of the ball|the better chances|the wind behind them] but could not find a way through.",
    "The attendance of {crowd} was the club's [highest|lowest|best] of the season.",
    "Coach {person} will [rotate the squad|stick with the same eleven|bring in two youngsters] for the midweek fixture against {club2}.",
    "The women's team continued their [unbeaten run|fine form|recovery] with a [3-0|2-1|4-2] win over {club2}.",
    "The referee, {person}, booked [five|six|three] players in a bad-tempered second half.",
    "Fans travelling to {town} are reminded that the away end opens at {time}.",
    "{club} have now kept [three|four|five] clean sheets in a row.",
    "The cricket section of {club} also [won|lost|had their match rained off] on {day}.",
    "Season tickets for next year go on sale on {date}, priced at {price}.",
    "{club} [beat|drew with|lost to] {club2} [{score}] at the weekend in front of a crowd of {crowd}.",
    "[Striker|Midfielder|Captain|Goalkeeper] {person} [scored twice|made a string of saves|was sent off|hit the post twice] in a lively first half.",
    "Manager {person} said afterwards that the team had [shown real character|been second best|deserved more].",
    "The result leaves {club} [third|bottom|fifth|two points clear] in the table with [six|nine|three] games to play.",
    "An injury to {person} means [she|he] will miss the next [three|four] matches.",
    "The second half was [scrappy|end-to-end|dominated by the visitors|a stop-start affair], with chances at both ends[ and {person} twice denied|].",
    "Next up for {club} is a trip to {town} on {day}.",
    "Ticket prices for the cup tie have been held at {price} for adults.",
    "The youth side also [won|impressed], beating {club2} [4-1|2-0|3-2].",
    "Supporters will be hoping the new signing, {person}, settles in quickly.",
    "[Rain|A downpour before kick-off|Wind off the estuary] made [the pitch heavy|conditions awkward] and [passing was difficult|both sides struggled to keep the ball].",
    "It was a [first|third|long-awaited] home win of the season.",
]
REVIEW = [
    "The {gadget} arrived [a day early|on time|a week late], well packaged.",
    "It connects to my [phone|laptop|old tablet] [instantly|after a couple of attempts|only if I restart both|most of the time].",
    "The [colour|finish|screen] is [nicer|duller|exactly as] in the photos.",
    "My [partner|teenager|dad] [loves it|finds it confusing|has already borrowed it].",
    "After {n} days of daily use there are [no scratches|a few marks|no problems at all].",
    "The instructions are only [two pages|a printed web link|in tiny print], which isn't ideal.",
    "It's noticeably [lighter|heavier|louder|quieter] than the [previous model|{oldgadget} it replaced].",
    "For context, I paid {price} in the {month} sale.",
    "I returned the first one because of [a dead pixel|a rattle|a faulty charger|a loose {part}]; the replacement [is fine|has been perfect|arrived in {n} days].",
    "Overall: [recommended|solid but not exciting|great for the price|I'd wait for the next version].",
    "I've been using the {gadget} for about [three weeks|two months|a fortnight] now.",
    "Setup took [five minutes|longer than I expected|about a quarter of an hour], mostly because of the app.",
    "Battery life is [excellent|disappointing|about what the box promises], lasting roughly [two days|eight hours|a week].",
    "Build quality feels [solid|a bit plasticky|premium for the price][, especially the {part}|, apart from the {part}|].",
    "At {price} it's [good value|on the expensive side|a bargain], though cheaper rivals exist.",
    "My main complaint is the [noise|weight|tiny buttons|short cable|{part}][, which {first} also noticed|].",
    "The [companion app|manual|instructions] could be clearer[ about {feature}|].",
    "Compared with my old [one|{oldgadget}], it's [much quieter|faster|easier to clean|about the same].",
    "Customer service replied within [a day|an hour|a week] when I had a question about [the warranty|{feature}|delivery].",
    "[Would I buy it again|Would I recommend it|Is it worth {price}|Would I buy another one]? [Probably yes|Yes, without hesitation|Only on sale|Probably, but not at full price|For {first}, definitely].",
    "Rating: {stars} out of 5.",
    "Pros: [light, quick, quiet|good screen, decent battery|simple to use|{feature} works well|nice {part}]. Cons: [pricey|fiddly {part}|no case included|{feature} is patchy|only {n} settings].",
    "After an update on {date} the connection problems went away.",
]
WEATHER = [
    "Rain will clear from the [west|north] by {time}, leaving a [fresher|brighter|cooler] afternoon.",
    "Expect [mist|fog patches|low cloud] around {town2} first thing, slow to lift.",
    "Maximum temperature {temp_c} degrees, minimum {low_c} degrees.",
    "The UV index will reach [4|5|6|7] by midday.",
    "[Showers|Squally showers|Drizzle] will merge into longer spells of rain [this evening|by {time2}|overnight].",
    "High pressure brings a settled spell until at least {day}.",
    "Sea temperatures are around [11|13|15|17] degrees - bracing for swimmers!",
    "Gusts of up to [50|60|70] km/h are possible on exposed coasts near {town}.",
    "Frost is likely in sheltered valleys[ around {town2}|], so gardeners should protect [tender plants|seedlings|early blossom].",
    "[Today|Tomorrow|This weekend] in {town}: [sunny spells|persistent rain|low cloud and drizzle|a bright but cold day], with highs of {temp_c} degrees.",
    "Winds will be [light|fresh to strong|gusty near the coast] from the [west|north-east|south].",
    "Overnight temperatures may fall to {low_c} degrees in rural areas[, with a touch of frost|].",
    "There is a chance of [thunderstorms|heavy showers|hail] later in the afternoon.",
    "The outlook for [the week ahead|the weekend|{day} onwards] is [unsettled|drier and warmer|changeable|colder, with wintry showers on high ground].",
    "A yellow warning for [rain|wind|fog] is in place for the {town} area until {time}.",
    "Pollen levels will be [high|moderate|low].",
    "Sunrise is at {time} and sunset at {time2}.",
    "[Coastal areas|Places near the sea like {town2}|The far west] will see the best of any sunshine[ this afternoon| on {day}|].",
    "Drivers are advised to allow extra time on the hill roads near {town2}.",
]
HOBBY = [
    "The new {tool} I bought for {price} has made a huge difference.",
    "I spent [two evenings|a whole weekend|most of {day}] getting the [base|frame|first layer] right.",
    "{first} from the club suggested [a different glue|an earlier start|a cheaper supplier in {town}], and it worked.",
    "The weather has been [kind|awful|unpredictable], which matters more than you'd think for {hobby}.",
    "Progress is slow but steady: I'd say I'm about [halfway|two-thirds|a quarter of the way] there.",
    "The club's newsletter this month has a [lovely|useful|very long] article on {hobby}.",
    "I'm giving a short presentation on {hobby} at the {town} library on {date} - do come along.",
    "Lesson learned: [measure twice|read the instructions|check the forecast|label everything|never trust a {tool} from a car boot sale].",
    "There's a [second-hand|car boot|club] sale in {town} on {day} where I usually find bargains.",
    "This week I finally finished the [layout|quilt|bookshelf|birdbox] I started back in {month}.",
    "If you're new to {hobby}, my advice is to start small and not spend too much on kit.",
    "A member of the {town} {hobby} club lent me [a better tool|an old guide|some spare parts], which helped enormously.",
    "I made the classic beginner's mistake of [rushing the glue|overwatering|forgetting to write anything down|buying the cheapest {tool}].",
    "The [monthly meeting|spring show|swap day] is on {date} at the church hall.",
    "Photos below - apologies for the [poor light|blurry ones|state of the {where}].",
    "[Several|A few] readers asked about costs: so far I've spent about {price}.",
    "Next time I want to try [a bigger project|something with more colour|working outdoors|the method {first} showed us|a {hobby} weekend in {town}].",
    "{hobby_cap} has taught me patience, if nothing else.",
    "Thanks to [everyone|{first}, {first} and everyone else|all of you] who [left comments on|shared|sent photos after] the [last post|post about the {tool}|{month} update]!",
    "I spent most of {day} [sorting through boxes|at the club|in the shed|out on the marsh].",
    "My [partner|husband|wife|flatmate|cat] has stopped [asking when it will be finished|commenting on the mess in the {where}|pretending to be interested].",
]


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
