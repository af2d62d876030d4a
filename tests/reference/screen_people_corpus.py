#!/usr/bin/python3
"""Generated corpus for the screen's person-name and postal-address kinds.

Scenario (our own): messages to and from the help desk of the "Harbour Street
Tool Library", a fictional lending library for tools with branches in the US
and the UK. Members introduce themselves, greet and sign off, give addresses
for van deliveries; the desk's texts also hold many capitalised words,
place names used in name-like places, product names built on a title,
street-like phrases in other senses and numbers with units.

Writes tests/data/screen/people_<seed>.tsv, one text per row:
    role<TAB>label<TAB>text<TAB>planted
role is "planted" (the text holds the values in `planted`) or "decoy" (none);
planted is "kind:begin-end" items joined by ";" (byte offsets into the text),
or "-". Newlines in text are written as the two characters \\n. The kinds are
person-name, us-street-address, uk-postcode-address, street-address-line. Some planted names and
addresses are written with no signal the screen looks for (a bare name in a
sentence, a street without city or postcode): they are counted in recall, so
recall says how much of what is there the screen finds, not how well it does
on what it was built for.

Everything is fake and safe: given names from the shipped list joined to
surnames made up here; streets and towns made up here; US ZIP codes in
000xx (not assigned, from memory); UK postcodes with the areas FA, OA, UA
(format-valid, not assigned to any area, from memory); e-mail domains from
RFC 2606; phones from Ofcom's drama ranges (from memory).

Tune on seed 20261221; report on seed 20261222, which adds phrasings and
decoys the tuning seed lacks (HELDOUT_*), written before tuning.
Regenerate:  /usr/bin/python3 tests/reference/screen_people_corpus.py SEED [OUT]
"""
import os
import random
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
TUNE_SEED = 20261221


def given_names():
    out = []
    with open(os.path.join(HERE, "..", "..", "rules", "lists", "given-names-en.txt")) as f:
        for line in f:
            line = line.strip()
            if line and not line.startswith("#") and line.isalpha() and 3 <= len(line) <= 9:
                out.append(line)
    return out


SURNAMES = ["Quillfeather", "Brackenridge", "Ashcombe", "Pennyworth", "Tallowby", "Marchbank", "Oakhurst",
            "Fernsby", "Copperfield", "Whitlock", "Harrowgate", "Bellweather", "Dunmore", "Kestrell", "Lindqvar",
            "Okonkwe", "Ravensworth", "Thistledown", "Vantongeren", "Yardley-Moss", "McTavers", "O'Dunleavy",
            "Nakamura-Hill", "Petrovska", "Delacroix-Vane"]
STREETS = ["Lanternhill", "Quarry Bank", "Willowmere", "Tinker", "Foundry", "Orchard Vale", "Kiln", "Ropewalk",
           "Saltmarsh", "Heron", "Bramblecote", "Millrace", "Chandler", "Copse"]
US_SUFFIX = ["Street", "St", "Avenue", "Ave", "Road", "Rd", "Lane", "Ln", "Drive", "Dr", "Court", "Ct", "Way",
             "Boulevard", "Blvd", "Place", "Terrace"]
UK_SUFFIX = ["Road", "Street", "Lane", "Avenue", "Close", "Drive", "Way", "Gardens", "Terrace", "Crescent", "Grove",
             "Mews", "Row"]
US_TOWNS = ["Fairbrook", "Quillby", "Lantern Falls", "Hollow Creek", "Pinehaven", "New Tarrow"]
UK_TOWNS = ["Ashcombe", "Little Tarrow", "Kilnsey Bridge", "Saltmere", "Upper Wych"]
STATES = ["OR", "WA", "CA", "NY", "TX", "IL", "MA", "VT", "ME", "CO"]
TOOLS = ["hedge trimmer", "mitre saw", "pressure washer", "tile cutter", "ladder", "drill", "sander", "router",
         "wallpaper steamer", "log splitter", "carpet cleaner", "jigsaw"]
DOMAINS = ["example.com", "example.org", "example.net", "toollibrary.example"]


class Gen:
    def __init__(self, seed):
        self.rng = random.Random(seed)
        self.given = given_names()
        self.heldout = seed != TUNE_SEED

    def first(self):
        return self.rng.choice(self.given)

    def last(self):
        return self.rng.choice(SURNAMES)

    def full(self):
        return "%s %s" % (self.first(), self.last())

    def tool(self):
        return self.rng.choice(TOOLS)

    def us_address(self, style):
        r = self.rng
        num = str(r.randint(1, 9999))
        street = "%s %s" % (r.choice(STREETS), r.choice(US_SUFFIX))
        if style == 1:
            street = r.choice(["N", "S", "E", "W"]) + " " + street
        unit = ""
        if style == 2:
            unit = r.choice([", Apt %d%s" % (r.randint(1, 30), r.choice("ABC")), " Suite %d" % r.randint(100, 900),
                             " Unit %d" % r.randint(1, 40)])
        zipc = "000%02d" % r.randint(10, 99)
        if style == 3:
            zipc += "-%04d" % r.randint(0, 9999)
        sep = "\n" if style == 4 else ", "
        return "%s %s%s%s%s, %s %s" % (num, street, unit, sep, r.choice(US_TOWNS), r.choice(STATES), zipc)

    def uk_postcode(self):
        r = self.rng
        return "%s%d %d%s%s" % (r.choice(["FA", "OA", "UA"]), r.randint(1, 29), r.randint(0, 9),
                                r.choice("ABDEFGHJLNPQRSTUWXYZ"), r.choice("ABDEFGHJLNPQRSTUWXYZ"))

    def uk_address(self, style):
        r = self.rng
        line = "%d %s %s" % (r.randint(1, 240), r.choice(STREETS), r.choice(UK_SUFFIX))
        if style == 1:
            line = "Flat %d, %s" % (r.randint(1, 12), line)
        town = r.choice(UK_TOWNS)
        if style == 2:
            return "%s\n%s\n%s" % (line, town, self.uk_postcode())
        return "%s, %s, %s" % (line, town, self.uk_postcode())


def planted_texts(g):
    """(label, text, [(kind, value)]) where each value occurs in text once."""
    r = g.rng
    k = r.randrange(24 + (5 if g.heldout else 0))
    f, l, t = g.first(), g.last(), g.tool()
    fl = "%s %s" % (f, l)
    email = "%s.%s@%s" % (f.lower(), l.lower().replace("'", ""), r.choice(DOMAINS))
    phone = "07700 900%03d" % r.randrange(1000)
    N = "person-name"
    if k == 0:
        return "intro", "Hello, my name is %s and I borrowed the %s last week." % (fl, t), [(N, fl)]
    if k == 1:
        return "intro", "I'm %s, from the Kiln Lane branch. The %s is jammed." % (f, t), [(N, f)]
    if k == 2:
        return "intro", "This is %s - the %s came back with a cracked guard." % (fl, t), [(N, fl)]
    if k == 3:
        return "intro", "Please call me %s, everyone does." % f, [(N, f)]
    if k == 4:
        return "salutation", "Dear %s,\nyour %s is ready to collect." % (f, t), [(N, f)]
    if k == 5:
        return "salutation", "Hi %s! The %s is due back on Friday." % (f, t), [(N, f)]
    if k == 6:
        return "salutation", "Hello %s,\nthanks for returning the %s so quickly." % (fl, t), [(N, fl)]
    if k == 7:
        return "sign-off", "The %s is back on the shelf.\nThanks,\n%s" % (t, f), [(N, f)]
    if k == 8:
        return "sign-off", "Could I extend the loan by a week?\nKind regards,\n%s" % fl, [(N, fl)]
    if k == 9:
        return "sign-off", "Blade swapped, all good. Cheers, %s" % f, [(N, f)]
    if k == 10:
        return "title", "Mr %s left the %s by the door." % (l, t), [(N, l)]
    if k == 11:
        return "title", "Please ask Dr %s to sign the loan form." % l, [(N, l)]
    if k == 12:
        return "title", "Ms %s returned the %s yesterday." % (fl, t), [(N, fl)]
    if k == 13:
        return "beside", "New member: %s <%s>" % (fl, email), [(N, fl), ("mailbox-address", email)]
    if k == 14:
        return "beside", "Van driver for Saturday is %s, %s." % (fl, phone), [(N, fl), ("phone", phone)]
    if k == 15:
        return "no-signal", "%s said the %s was blunt when it came back." % (f, t), [(N, f)]
    if k == 16:
        return "no-signal", "Can you check with %s whether the %s has a case?" % (fl, t), [(N, fl)]
    us_style, uk_style = r.randrange(5), r.randrange(3)
    if k == 17:
        a = g.us_address(us_style)
        return "us", "Please deliver the %s to %s tomorrow." % (t, a), [("us-street-address", a)]
    if k == 18:
        a = g.us_address(us_style)
        return "us", "Delivery address:\n%s" % a, [("us-street-address", a)]
    if k == 19:
        a = g.us_address(us_style)
        return "us", "I moved! New address is %s, so send the reminder there." % a, [("us-street-address", a)]
    if k == 20:
        a = g.uk_address(uk_style)
        return "uk", "Please drop the %s at %s before noon." % (t, a), [("uk-postcode-address", a)]
    if k == 21:
        a = g.uk_address(uk_style)
        return "uk", "Collection from:\n%s" % a, [("uk-postcode-address", a)]
    if k == 22:
        a = "%d %s %s" % (r.randint(1, 200), r.choice(STREETS), r.choice(US_SUFFIX))
        return "street-only", "Leave the %s on the porch at %s, round the back." % (t, a), [("street-address-line", a)]
    if k == 23:
        a = g.uk_address(uk_style)
        return "uk", "%s\n%s" % (fl, a), [(N, fl), ("uk-postcode-address", a)]
    # held-out phrasings (report seed only)
    if k == 24:
        return "intro-heldout", "Hiya, %s here - is the %s free this weekend?" % (fl, t), [(N, fl)]
    if k == 25:
        return "salutation-heldout", "Morning %s, the %s is charged." % (f, t), [(N, f)]
    if k == 26:
        return "sign-off-heldout", "See you Saturday.\nAll the best,\n%s" % fl, [(N, fl)]
    if k == 27:
        a = g.us_address(us_style)
        return "us-heldout", "Ship to: %s (ring the bell twice)" % a, [("us-street-address", a)]
    a = g.uk_address(uk_style)
    return "uk-heldout", "Our new workshop is at %s, opposite the green." % a, [("uk-postcode-address", a)]


def decoy_texts(g):
    r = g.rng
    k = r.randrange(26 + (4 if g.heldout else 0))
    t = g.tool()
    n = r.randint(2, 400)
    items = [
        ("capitalised", "Dear Customer,\nyour %s is overdue." % t),
        ("capitalised", "Hi Team! Stocktake starts at %d." % r.randint(8, 10)),
        ("capitalised", "Thanks, Everyone\nfor the help with the move."),
        ("capitalised", "I'm Sorry the %s was late." % t),
        ("capitalised", "This is Important: bring the %s back clean." % t),
        ("capitalised", "Call me Maybe is playing in the workshop again."),
        ("place", "I'm in Florence until Monday, back after that."),
        ("place", "Hi Chelsea branch, can you send two ladders?"),
        ("place", "This is Austin Library's old %s." % t),
        ("place", "Greetings from Paris! The %s made it." % t),
        ("place", "Thanks, Jordan Valley crew, for the loan."),
        ("product", "Dr Pepper and crisps are in the staff fridge."),
        ("product", "Wipe the bench with Mr Muscle before closing."),
        ("product", "Mr Clean spray is under the sink."),
        ("product", "Steel toe caps like Dr Martens are required for the %s." % t),
        ("street-sense", "Wall Street rallied, so the donation came through."),
        ("street-sense", "It is not exactly Easy Street running a %s rota." % t),
        ("street-sense", "We watched the Abbey Road documentary after closing."),
        ("street-sense", "The Main Street stores lent us %d chairs." % n),
        ("street-sense", "Route 66 and Highway 61 are the names of our two vans."),
        ("units", "The %s needs %d Way Road pins and a 25 mm bit." % (t, n)),
        ("units", "We drove %d miles down the Coast Road, WA 98 km/h limit." % n),
        ("units", "Order %d Oak Drive screws, CA %d units, batch %05d." % (n, r.randint(10, 99), r.randrange(100000))),
        ("units", "Hose is %d ft; pump %d Park Lane bar, size UK 9." % (n, r.randint(2, 9))),
        ("units", "Board %d x %d mm, %d Willow Street kit, OR 20 %d." % (n, n + 20, r.randint(2, 9), r.randrange(100))),
        ("version", "Firmware %d.%d on the till; build FA1 2AB-%d is broken." % (r.randint(1, 9), r.randint(0, 9), n)),
    ]
    if g.heldout:
        items += [
            ("product-heldout", "Buff the handles with Mr Sheen."),
            ("product-heldout", "Dr Scholl insoles are in the lost property box."),
            ("place-heldout", "Dear Sydney office,\nthe %s is on its way." % t),
            ("street-heldout", "She runs the %d Harbour Street branch, not the one on Foundry Road." % n),
        ]
    return items[k]


def main():
    seed = int(sys.argv[1]) if len(sys.argv) > 1 else TUNE_SEED
    out = sys.argv[2] if len(sys.argv) > 2 else os.path.join(HERE, "..", "data", "screen", "people_%d.tsv" % seed)
    g = Gen(seed)
    rows = []
    for _ in range(700):
        label, text, vals = planted_texts(g)
        spans = []
        for kind, v in vals:
            if kind in ("phone", "mailbox-address"):
                continue  # scored by the other kinds' tests; here only the anchor of a nearby name
            assert text.count(v) == 1, (text, v)
            b = text.index(v)
            spans.append("%s:%d-%d" % (kind, b, b + len(v.encode())))
        rows.append(("planted", label, text, ";".join(spans)))
    for _ in range(500):
        label, text = decoy_texts(g)
        rows.append(("decoy", label, text, "-"))
    g.rng.shuffle(rows)
    with open(out, "w") as f:
        f.write("# made by tests/reference/screen_people_corpus.py %d\n" % seed)
        for role, label, text, planted in rows:
            assert "\t" not in text and "\\" not in text and text.isascii()
            f.write("\t".join([role, label, text.replace("\n", "\\n"), planted]) + "\n")
    print("wrote %d rows to %s" % (len(rows), out))


if __name__ == "__main__":
    main()
