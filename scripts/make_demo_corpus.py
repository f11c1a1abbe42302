#!/usr/bin/env python3
"""Generate the invented demo corpus fixtures/demo/ferry-log.txt.

The scenario is made up for the quern demo: the radio log and notice board
of the Skerrow Sound Ferry Cooperative, which runs two small boats between
the harbour town of Carnmoor and three islands (Inchbrae, Holm of Lusk and
Little Fenn). Every name, place, number and event is invented.

The text is built from hand-written templates and word lists with a seeded
random.Random, so the output is the same on every run and every machine:

    python3 scripts/make_demo_corpus.py > fixtures/demo/ferry-log.txt
    python3 scripts/make_demo_corpus.py -o fixtures/demo/ferry-log.txt

With --crawl it writes instead an invented crawl of the cooperative's web
message board as JSON lines (`{"url": ..., "text": ...}`, the text's lines
being its sentences), the input of the README's crawl-filtering examples:
posts written like the log (from another seed), shop and cookie boilerplate,
keyword spam, and a last line cut off in the middle:

    python3 scripts/make_demo_corpus.py --crawl -o fixtures/demo/ferry-board.jsonl

One sentence per line. Common phrases repeat on purpose, so that n-grams
repeat and queries on the demo store are interesting.

Standard library only.
"""

import argparse
import random
import sys

SEED = 20240611

VESSELS = ["Guillemot", "Marram", "Guillemot", "Marram", "Kittiwake"]
ISLANDS = ["Inchbrae", "Holm of Lusk", "Little Fenn"]
SKIPPERS = ["Morag Tulloch", "Ewan Skerry", "Aoife Ní Bhriain", "Søren Hald"]
DECKHANDS = ["Calum", "Isla", "Pádraig", "Nessa", "young Duncan"]
ISLANDERS = [
    "Mrs Flett", "old Mr Gunn", "Kirsty Rendall", "the Moncrieff twins",
    "Dr Anand", "the schoolteacher", "Jamie at the shop", "Father Tomasz",
    "the postie", "Hamish Corrie", "Ailsa from the croft at Breck",
    "the lighthouse keeper", "Mrs Oyelaran", "the minister's wife",
]
DAYS = ["Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday"]
MONTHS = [("March", 31), ("April", 30), ("May", 31), ("June", 30)]
WINDS = ["north", "north-west", "west", "south-west", "south", "south-east", "east"]
WIND_WORDS = ["light", "moderate", "fresh", "strong", "gale force"]
SEA_WORDS = ["calm", "slight", "moderate", "rough", "very rough"]
SKY = [
    "clear skies", "low cloud", "drizzle", "heavy showers", "sea fog",
    "bright spells", "rain later", "hail showers",
]
CARGO_ANIMALS = [("sheep", "sheep"), ("ewes", "ewes"), ("lambs", "lambs"),
                 ("hens", "crated hens"), ("calves", "calves")]
CARGO_THINGS = [
    "bicycles", "sacks of feed", "crates of groceries", "bags of mail",
    "gas bottles", "bales of hay", "boxes of books for the school",
    "drums of diesel", "rolls of fencing wire", "pallets of slates",
    "fish boxes", "tins of paint",
]
ONE_OFF_CARGO = [
    "a piano for the village hall", "a coffin, with the family travelling",
    "a new washing machine for the manse", "the doctor's bicycle",
    "a rowing boat on a trailer", "a beehive, sealed and labelled",
    "two tonnes of gravel for the pier road", "a wedding cake in a tin box",
    "the replacement battery for the lighthouse", "a crate of seed potatoes",
]
LOST_ITEMS = [
    "a green waterproof jacket", "a child's red wellington boot",
    "a pair of reading glasses in a brown case", "a black umbrella",
    "a set of keys on a puffin keyring", "a knitted blue hat",
    "a library book about knots", "a thermos flask", "a walking stick",
    "a mobile phone in a yellow case", "one leather glove", "a dog lead",
    "a camera bag", "a hymn book", "a sketchbook full of birds",
]
FOUND_PLACES = [
    "on the upper deck", "in the passenger cabin", "on the pier at Carnmoor",
    "under a bench in the waiting room", "beside the ticket hut",
    "on the slipway at Inchbrae", "in the car deck", "by the lifejacket locker",
]
REASONS_WEATHER = [
    "the swell at the Inchbrae slip", "gale force gusts in the Sound",
    "sea fog at the harbour mouth", "poor visibility off the Holm",
    "the tide being too low at Little Fenn",
]
REASONS_FAULT = [
    "a fault in the port engine", "a broken ramp chain",
    "a medical call for the skipper", "a blocked fuel filter",
]


def fmt_time(minutes):
    return "%02d%02d" % (minutes // 60, minutes % 60)


class Log:
    def __init__(self, rng):
        self.rng = rng
        self.lines = []

    def say(self, text):
        self.lines.append(text)

    def pick(self, seq):
        return self.rng.choice(seq)


def weather_line(log, wind, strength, sea):
    r = log.rng
    sky = log.pick(SKY)
    forms = [
        "Forecast for the Sound is wind %s %s, sea state %s, %s." % (wind, strength, sea, sky),
        "Wind %s %s, sea %s, %s." % (wind, strength, sea, sky),
        "Coastguard forecast: %s %s, sea %s, %s." % (strength, wind, sea, sky),
        "Weather at first light: %s and %s, wind %s %s." % (sky, sea.replace("very ", "") + " sea", wind, strength),
    ]
    weights = [5, 4, 2, 1]
    log.say(r.choices(forms, weights)[0])


def cargo_phrase(log):
    r = log.rng
    parts = {}  # kind -> phrase, so one kind of cargo is named once
    for _ in range(r.choice([1, 1, 1, 2, 2, 3])):
        k = r.random()
        if k < 0.35:
            kind, phrase = log.pick(CARGO_ANIMALS)
            parts.setdefault(kind, "%d %s" % (r.choice([4, 6, 8, 10, 12, 12, 20, 24, 30, 40]), phrase))
        elif k < 0.9:
            thing = log.pick(CARGO_THINGS)
            parts.setdefault(thing, "%d %s" % (r.randint(2, 16), thing))
        else:
            one = log.pick(ONE_OFF_CARGO)
            parts.setdefault(one, one)
    parts = list(parts.values())
    if len(parts) == 1:
        return parts[0]
    return ", ".join(parts[:-1]) + " and " + parts[-1]


def departure(log, t, vessel, frm, to):
    r = log.rng
    pax = r.randint(0, 38)
    forms = [
        "%s %s departed %s for %s with %d passengers." % (fmt_time(t), vessel, frm, to, pax),
        "%s %s departed %s for %s with %d passengers, cargo %s." % (fmt_time(t), vessel, frm, to, pax, cargo_phrase(log)),
        "%s %s away from %s, bound for %s, %d on board." % (fmt_time(t), vessel, frm, to, pax),
        "%s %s left %s on time." % (fmt_time(t), vessel, frm),
        "%s %s left %s ten minutes late, waiting for the mail van." % (fmt_time(t), vessel, frm),
        "%s %s departed %s for %s with %s." % (fmt_time(t), vessel, frm, to, cargo_phrase(log)),
    ]
    log.say(r.choices(forms, [6, 6, 2, 3, 1, 3])[0])


def arrival(log, t, vessel, to):
    r = log.rng
    forms = [
        "%s %s arrived %s." % (fmt_time(t), vessel, to),
        "%s %s alongside at %s, all well." % (fmt_time(t), vessel, to),
        "%s %s arrived %s, unloading." % (fmt_time(t), vessel, to),
        "%s %s arrived %s after a lumpy crossing." % (fmt_time(t), vessel, to),
        "%s %s tied up at %s and the ramp is down." % (fmt_time(t), vessel, to),
    ]
    log.say(r.choices(forms, [6, 4, 3, 1, 1])[0])


def radio_chatter(log, t, vessel, skipper):
    r = log.rng
    hand = log.pick(DECKHANDS)
    who = log.pick(ISLANDERS)
    island = log.pick(ISLANDS)
    forms = [
        "%s %s calling Carnmoor, radio check, over." % (fmt_time(t), vessel),
        "%s Carnmoor to %s, loud and clear, over." % (fmt_time(t), vessel),
        "%s %s reports seals on the rocks at the Holm, no concern." % (fmt_time(t), vessel),
        "%s %s asks the office to phone %s about a parcel." % (fmt_time(t), vessel, who),
        "%s %s says %s has cut a hand on the ramp chain, first aid given, carrying on." % (fmt_time(t), vessel, hand),
        "%s %s reports a fishing boat without lights near the %s skerries." % (fmt_time(t), vessel, island),
        "%s Skipper %s asks for the tide times at %s." % (fmt_time(t), skipper, island),
        "%s %s slowing down for a pod of dolphins off %s." % (fmt_time(t), vessel, island),
        "%s %s reports the buoy at the harbour mouth is not lit." % (fmt_time(t), vessel),
        "%s %s passing the Holm, sea easing." % (fmt_time(t), vessel),
        "%s %s has %s on board, who wants a taxi at Carnmoor." % (fmt_time(t), vessel, who),
        "%s %s calling Carnmoor, we have a dog loose on the car deck, over." % (fmt_time(t), vessel),
    ]
    log.say(log.pick(forms))


def hold(log, t, vessel, place, weather):
    r = log.rng
    reason = log.pick(REASONS_WEATHER if weather else REASONS_FAULT)
    forms = [
        "%s %s holding at %s because of %s." % (fmt_time(t), vessel, place, reason),
        "%s Sailing cancelled because of %s." % (fmt_time(t), reason),
        "%s %s sailing delayed one hour because of %s." % (fmt_time(t), vessel, reason),
    ]
    if weather:
        forms.append("%s Weather hold, next sailing under review at %s." % (fmt_time(t), fmt_time(t + 120)))
    log.say(log.pick(forms))
    if r.random() < 0.5:
        log.say("Passengers have been told and the waiting room is open.")
    if weather and r.random() < 0.3:
        log.say("The school children from %s will stay with families on the mainland tonight." % log.pick(ISLANDS))
    if r.random() < 0.5:
        later = fmt_time(min(t + r.choice([90, 120, 180]), 17 * 60))
        if weather:
            log.say("%s Weather easing, %s will try one sailing to %s." % (later, vessel, log.pick(ISLANDS)))
        else:
            log.say("%s Repair done, %s back in service." % (later, vessel))


def notice(log):
    r = log.rng
    island = log.pick(ISLANDS)
    who = log.pick(ISLANDERS)
    n = r.random()
    if n < 0.3:
        item = log.pick(LOST_ITEMS)
        place = log.pick(FOUND_PLACES)
        forms = [
            "Lost property: %s found %s." % (item, place),
            "Found %s, please ask at the ticket hut." % item,
            "Lost property: %s, left %s, now in the office." % (item, place),
            "Has anyone seen %s? It was lost %s." % (item, place),
            "%s has lost %s, possibly %s." % (who[0].upper() + who[1:], item, place),
        ]
        log.say(r.choices(forms, [4, 3, 2, 1, 2])[0])
        if r.random() < 0.4:
            log.say("Lost property is kept for three months and then given to the charity shop.")
    elif n < 0.45:
        log.say(log.pick([
            "Notice: sheep must travel in pens on the car deck and not in the passenger cabin.",
            "Notice: bicycles travel free but must be tied to the rail on the upper deck.",
            "Notice: dogs are welcome on the upper deck if kept on a lead.",
            "Notice: please book livestock with the office at least one day before sailing.",
            "Notice: the waiting room at Carnmoor is closed on Sunday for cleaning.",
            "Notice: tickets can be paid in cash or by card at the ticket hut.",
            "Notice: the timetable may change without warning in bad weather.",
        ]))
    elif n < 0.6:
        price = r.choice([2, 3, 4, 5, 8, 10, 15, 20, 25])
        log.say(log.pick([
            "For sale: a %s in good order, %d pounds, ask %s." % (log.pick(["bicycle", "rowing boat", "pair of oars", "sheep trailer", "peat spade", "sewing machine"]), price * 5, who),
            "Wanted: a lift from the %s slip to the school on Friday mornings, ask %s." % (island, who),
            "Cake sale in the village hall on %s, all money to the lifeboat fund." % log.pick(DAYS),
            "The ceilidh on %s is on %s, the ferry will wait until midnight." % (island, log.pick(DAYS)),
            "Thank you to everyone who helped %s move house to %s." % (who, island),
            "Knitting group meets in the waiting room on %s at two o'clock." % log.pick(DAYS),
        ]))
    elif n < 0.7:
        log.say(log.pick([
            "Minutes of the cooperative meeting: the new ramp for %s is still waiting for money from the council." % island,
            "Minutes of the cooperative meeting: members agreed to raise the sheep fare by %d pence." % r.choice([10, 20, 25, 50]),
            "Minutes of the cooperative meeting: %d members present, apologies from %s." % (r.randint(9, 41), who),
            "Minutes of the cooperative meeting: the %s is due for her annual inspection in %s." % (log.pick(VESSELS), log.pick(MONTHS)[0]),
            "Minutes of the cooperative meeting: thanks to %s for painting the ticket hut." % who,
        ]))
    elif n < 0.85:
        log.say(log.pick([
            "Reminder: the last sailing from %s on Saturday is at %s." % (island, fmt_time(r.choice([1020, 1050, 1080, 1110]))),
            "Reminder: lifejackets are under the seats in the passenger cabin.",
            "Reminder: please do not stand on the ramp while the ramp is moving.",
            "Reminder: the office phone is answered from eight until six.",
        ]))
    else:
        log.say(log.pick([
            "The %s is back from the slipway with a new propeller." % log.pick(VESSELS),
            "The fuel barge came in and both boats are full.",
            "The harbour master asks all boats to keep clear of the dredger.",
            "A seal pup has been living on the Inchbrae slip, please leave it alone.",
            "The old Kittiwake is on standby and can be crewed at one hour's notice.",
            "The new timetable is pinned up beside the ticket hut.",
        ]))


def one_day(log, day_name, day, month, where):
    """One day of the log; `where` maps each vessel to the harbour it is at."""
    r = log.rng
    log.say("Log for %s %d %s." % (day_name, day, month))
    wind = log.pick(WINDS)
    level = r.choices(range(5), [3, 5, 4, 2, 1])[0]
    strength = WIND_WORDS[level]
    sea = SEA_WORDS[min(4, max(0, level + r.choice([-1, 0, 0, 1])))]
    weather_line(log, wind, strength, sea)
    skipper = log.pick(SKIPPERS)
    log.say(log.pick([
        "Skipper today is %s with %s as deckhand." % (skipper, log.pick(DECKHANDS)),
        "Skipper today is %s with %s as deckhand." % (skipper, log.pick(DECKHANDS)),
        "Crew: %s and %s." % (skipper, log.pick(DECKHANDS)),
        "%s in charge today." % skipper,
    ]))
    weather_hold = level >= 4 or (level == 3 and r.random() < 0.4)
    fault = not weather_hold and r.random() < 0.06
    t = r.choice([410, 415, 420, 425, 430])  # first sailing around 0700
    if weather_hold:
        sailings = r.randint(0, 2)
    else:
        sailings = r.randint(3, 6)
    fault_at = r.randint(0, sailings - 1) if fault else -1
    for i in range(sailings):
        vessel = log.pick(VESSELS[:2])
        frm = where[vessel]
        if i == fault_at:
            hold(log, t, vessel, frm, weather=False)
            t += 120
            continue
        to = log.pick(ISLANDS) if frm == "Carnmoor" else r.choice(["Carnmoor", "Carnmoor", log.pick(ISLANDS)])
        if to == frm:
            to = "Carnmoor"
        departure(log, t, vessel, frm, to)
        crossing = r.choice([25, 35, 40, 45, 50, 55, 70])
        if r.random() < 0.45:
            radio_chatter(log, t + crossing // 2, vessel, skipper)
        arrival(log, t + crossing, vessel, to)
        where[vessel] = to
        t += crossing + r.choice([20, 30, 45, 60, 90])
        if r.random() < 0.2:
            notice(log)
    if weather_hold:
        vessel = log.pick(VESSELS[:2])
        hold(log, t, vessel, where[vessel], weather=True)
    for _ in range(r.choices([0, 1, 2, 3], [3, 4, 2, 1])[0]):
        notice(log)
    home = [v for v in VESSELS[:2] if where[v] != "Carnmoor"]
    if home and r.random() < 0.7:
        for v in home:
            log.say("%s %s returned light to Carnmoor for the night." % (fmt_time(max(t, 16 * 60) + 30), v))
            where[v] = "Carnmoor"
    log.say(log.pick([
        "End of log for today.",
        "End of log for today.",
        "End of log, both boats on the moorings.",
        "Office closed at %s." % fmt_time(r.choice([17 * 60 + 30, 18 * 60, 18 * 60 + 15])),
    ]))


def build(rng):
    log = Log(rng)
    log.say("Radio log and notice board of the Skerrow Sound Ferry Cooperative, Carnmoor office.")
    log.say("This copy was typed up from the office book by the volunteer secretary.")
    weekday = 2  # the log starts on a Wednesday
    where = {v: "Carnmoor" for v in VESSELS}
    for month, ndays in MONTHS:
        for day in range(1, ndays + 1):
            one_day(log, DAYS[weekday], day, month, where)
            weekday = (weekday + 1) % 7
    log.say("End of the spring book.")
    return log.lines


BOILERPLATE = [
    "We use cookies to improve your experience on our website.",
    "Accept all cookies", "Manage cookie preferences", "Reject non-essential cookies",
    "Add to basket", "Add to wishlist", "Quick view", "Compare products",
    "Free delivery on orders over 40 pounds", "Sign up to our newsletter for 10% off",
    "Follow us on social media", "Copyright 2026 All rights reserved",
    "Terms and conditions", "Privacy policy", "Sort by price low to high",
    "Showing 1 to 24 of 318 results", "Customers also bought", "Write a review",
    "Your basket is empty", "Log in or create an account",
]
SPAM = [
    "cheap", "ferry", "tickets", "best", "price", "online", "casino", "bonus", "win",
    "crypto", "loans", "fast", "click", "here", "now", "deal", "discount", "free",
]


def crawl(rng):
    """The invented board crawl: (url, text) pairs, text lines as sentences."""
    posts = build(random.Random(rng.randrange(1 << 30)))[2:]
    docs = []
    i = 0
    while i < len(posts) and len(docs) < 260:
        n = rng.randint(2, 9)
        docs.append("\n".join(posts[i:i + n]))
        i += n + rng.randint(0, 12)
    for _ in range(50):
        docs.append("\n".join(rng.sample(BOILERPLATE, rng.randint(3, 8))))
    for _ in range(20):
        docs.append(" ".join(rng.choice(SPAM) for _ in range(rng.randint(8, 30))))
    rng.shuffle(docs)
    return [("https://skerrow-ferry.example/board/%d" % (1000 + k), t) for k, t in enumerate(docs)]


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("-o", "--output", help="write here instead of stdout")
    ap.add_argument("--seed", type=int, default=SEED, help="random seed (default %(default)s)")
    ap.add_argument("--crawl", action="store_true",
                    help="write the invented message-board crawl (JSON lines) instead")
    args = ap.parse_args(argv)
    if args.crawl:
        import json
        docs = crawl(random.Random(args.seed + 1))
        lines = [json.dumps({"url": u, "text": t}, ensure_ascii=False) for u, t in docs]
        lines.append(lines[len(lines) // 2][:70])  # a line cut off in the middle
    else:
        lines = build(random.Random(args.seed))
    text = "".join(line + "\n" for line in lines)
    if args.output:
        with open(args.output, "w", encoding="utf-8", newline="\n") as f:
            f.write(text)
    else:
        sys.stdout.buffer.write(text.encode("utf-8"))
    return 0


if __name__ == "__main__":
    sys.exit(main())
