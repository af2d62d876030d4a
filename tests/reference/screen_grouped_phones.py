#!/usr/bin/python3
"""National numbers in their standard grouping, without a phone word, among decoys.

Scenario (our own): messages to and from the help desk of the "Harbour Street
Tool Library", a fictional lending library for tools with branches in the UK
and in Germany. Members and volunteers leave numbers after labels such as
"Reference:" or in the middle of a sentence, with no phone word nearby; the
desk's texts are full of numbers that are not phones (order numbers, dates,
times, version strings, measurements, invoice and ticket references).

Writes tests/data/screen/grouped_phones_<seed>.tsv, one text per row:
    role<TAB>label<TAB>text<TAB>planted<TAB>matcher
role is "planted" (the text holds one phone number) or "decoy" (it holds none);
planted is "begin-end" (byte offsets of the number) or "-"; matcher lists the
spans that python3-phonenumbers' PhoneNumberMatcher finds in the same text
(regions GB and DE, its default leniency VALID), as "begin-end" joined by ",",
or "-". Recall against the matcher = the share of the planted numbers that the
matcher finds which the screen finds too (VALID, not POSSIBLE: at POSSIBLE the
matcher takes nearly every decoy for a number; some drama ranges, e.g.
07700 900xxx, are not VALID, so the matcher-based recall covers fewer numbers
than the recall against the planted truth).
All text is ASCII, so character offsets are byte offsets.

Numbers are fake and safe:
- UK: Ofcom's ranges for drama (from memory of Ofcom's published list):
  020 7946 0000-0999, 0113/0114/0115/0116/0117/0118 496 0000-0999,
  0121/0131/0141/0151/0161 496 0000-0999, 01632 960000-960999,
  07700 900000-900999, 0808 157 0000-0999.
- DE: the blocks the Bundesnetzagentur set aside for film and television
  (from memory, unverified): 030 23125 000-999, 040 66969 000-999,
  069 90009 000-999, 089 99998 000-999; written in the DIN 5008 grouping
  (area code, a space, the subscriber number in one block; from memory).
Standard groupings (from memory of Ofcom's numbering-plan presentation):
  02x xxxx xxxx, 01x1 xxx xxxx, 011x xxx xxxx, 01xxx xxxxxx, 07xxx xxxxxx,
  08xx xxx xxxx.

Tune on seed 20261211; report on seed 20261212 (not looked at while tuning).
Regenerate:  /usr/bin/python3 tests/reference/screen_grouped_phones.py SEED [OUT]
"""
import os
import random
import sys

import phonenumbers
from phonenumbers import Leniency, PhoneNumberMatcher


def uk_number(rng):
    k = rng.randrange(6)
    x = rng.randrange(1000)
    if k == 0:
        return "020 7946 0%03d" % x
    if k == 1:
        return "%s 496 0%03d" % (rng.choice(["0113", "0114", "0115", "0116", "0117", "0118"]), x)
    if k == 2:
        return "%s 496 0%03d" % (rng.choice(["0121", "0131", "0141", "0151", "0161"]), x)
    if k == 3:
        return "01632 960%03d" % x
    if k == 4:
        return "07700 900%03d" % x
    return "0808 157 0%03d" % x


def de_number(rng):
    area, block = rng.choice([("030", "23125"), ("040", "66969"), ("069", "90009"), ("089", "99998")])
    n = "%s %s%03d" % (area, block, rng.randrange(1000))
    if rng.random() < 0.2:
        n += "-%d" % rng.randrange(10, 99)  # DIN 5008 extension
    return n


NAMES = ["Sam", "Priya", "Tomasz", "Alex", "Jo", "Mika", "Noor", "Ruth", "Dev", "Lotte", "Femi", "Kai"]
TOOLS = ["hedge trimmer", "mitre saw", "pressure washer", "tile cutter", "ladder", "drill", "sander", "router",
         "wallpaper steamer", "log splitter", "carpet cleaner", "jigsaw"]

# Planted phrasings: no phone word ("phone", "call", "tel", "mobile", "ring",
# "contact", "number", "reach", "message", ...) within 40 bytes of the number.
UK_FRAMES = [
    "Reference: {n}",
    "Reference: {n}. The {tool} is back on the shelf.",
    "Backup person for the {tool}: {name}, {n}",
    "If the shutter is down, try {n} before 6.",
    "{name} ({n}) will collect the {tool} on Friday.",
    "Out of hours: {n}",
    "Emergency key holder {n}",
    "Lender details - {name}, {n}, branch Harbour Street.",
    "Please note {n} for the van driver.",
    "For the {tool} deposit speak to {name} on {n}.",
    "Van booking confirmed. Driver {n}.",
    "The volunteer for Saturday is {name}; {n}.",
]
DE_FRAMES = [
    "Rueckfragen: {n}",
    "Ansprechpartner {name}, {n}",
    "Werkstatt Hafenstrasse - {n}",
    "Abholung des Geraets ({tool}) bei {name}: {n}",
    "Bei Fragen zur Kaution: {n}",
    "Reference: {n}",
    "{name} ({n}) bringt den {tool} zurueck.",
    "Out of hours: {n}",
]
# Phrasings and decoys used only on the report seed (written before tuning,
# never run while tuning), so the reported figures also cover wording the
# rules were not tuned on.
HELDOUT_FRAMES = [
    "Weekend cover: {name} {n}",
    "Leave the {tool} with {name} - {n} - at the side door.",
    "Key safe code is with {name} ({n}).",
    "Vertretung: {name} {n}",
]
HELDOUT_DECOYS = [
    ("serial", "Serial 0{a} {b} on the {tool}."),
    ("lot", "Lot 0{a} {b}, use by {d}."),
    ("isbn", "Manual ISBN 0 {c} {b} {e}."),
    ("price", "Deposit GBP {e}0, {a} pence per day."),
]


def heldout_decoy(rng):
    label, frame = rng.choice(HELDOUT_DECOYS)
    return label, frame.format(a=rng.randint(1000, 9999), b=rng.randint(100000, 999999), c=rng.randint(10, 99),
                               d="%02d.%02d.2026" % (rng.randint(1, 28), rng.randint(1, 12)),
                               e=rng.randint(1, 9), tool=rng.choice(TOOLS))


# Frames with a phone word nearby: the rules found these before too.
WORD_FRAMES = [
    "Call {name} on {n} about the {tool}.",
    "Mobile: {n}",
    "Phone the desk: {n}",
]


def decoys(rng):
    """One decoy text: numbers that must not be read as phones."""
    y = rng.choice([2025, 2026])
    m, d = rng.randint(1, 12), rng.randint(1, 28)
    k = rng.randrange(22)
    if k == 0:
        return "order", "Order no. %d-%05d shipped." % (y, rng.randrange(100000))
    if k == 1:
        return "order", "Order 0%d %06d is ready for pickup." % (rng.randint(1, 9), rng.randrange(1000000))
    if k == 2:
        return "order", "Your order #%08d (%d items) was split." % (rng.randrange(10 ** 8), rng.randint(2, 9))
    if k == 3:
        return "date", "Due back %02d/%02d/%d, renewed on %d-%02d-%02d." % (d, m, y, y, m, d)
    if k == 4:
        return "date", "Closed %02d %02d %d and %02d.%02d.%d." % (d, m, y, rng.randint(1, 28), m, y)
    if k == 5:
        return "time", "Open %02d:%02d-%02d:%02d, last loan at %02d %02d." % (
            rng.randint(7, 10), rng.choice([0, 30]), rng.randint(16, 20), rng.choice([0, 30]),
            rng.randint(15, 19), rng.choice([0, 15, 30, 45]))
    if k == 6:
        return "version", "Booking app version %d.%d.%d (build %04d %04d)." % (
            rng.randint(1, 9), rng.randint(0, 20), rng.randint(0, 99), rng.randrange(10000), rng.randrange(10000))
    if k == 7:
        return "version", "Firmware 0%d.%02d.%03d on the label printer." % (rng.randint(1, 9), rng.randrange(100),
                                                                           rng.randrange(1000))
    if k == 8:
        return "measurement", "The %s needs a %d mm bit and %d W; cable %d m." % (
            rng.choice(TOOLS), rng.randint(3, 12), rng.choice([500, 750, 1200, 1800]), rng.randint(5, 25))
    if k == 9:
        return "measurement", "Board is %d x %d x %d mm, weight %d g." % (
            rng.randint(1000, 2440), rng.randint(300, 1220), rng.randint(9, 25), rng.randint(1000, 9000))
    if k == 10:
        return "measurement", "Tank 0%d %03d litres, hose %d cm." % (rng.randint(1, 9), rng.randrange(1000),
                                                                     rng.randint(100, 900))
    if k == 11:
        return "invoice", "Invoice INV-%d-%05d, total GBP %d.%02d." % (y, rng.randrange(100000), rng.randint(5, 300),
                                                                      rng.randrange(100))
    if k == 12:
        return "invoice", "Invoice %04d %04d %04d settled." % (rng.randrange(10000), rng.randrange(10000),
                                                               rng.randrange(10000))
    if k == 13:
        return "invoice", "Rechnung Nr. 0%d %07d vom %02d.%02d.%d." % (rng.randint(1, 9), rng.randrange(10 ** 7),
                                                                     d, m, y)
    if k == 14:
        return "ticket", "Ticket %d-%04d reopened by %s." % (y, rng.randrange(10000), rng.choice(NAMES))
    if k == 15:
        return "ticket", "Ticket ref 0%d%02d %d %04d (%s)." % (rng.randint(1, 9), rng.randrange(100),
                                                              rng.randint(100, 999), rng.randrange(10000),
                                                              rng.choice(TOOLS))
    if k == 16:
        return "ticket", "Case %05d %06d closed." % (rng.randrange(100000), rng.randrange(1000000))
    if k == 17:
        return "order", "Parcel 0%d%03d %06d left at the gate." % (rng.randint(1, 9), rng.randrange(1000),
                                                                  rng.randrange(1000000))
    if k == 18:
        return "measurement", "Meter reading 0%04d %d kWh." % (rng.randrange(10000), rng.randint(100, 999))
    if k == 19:
        return "date", "Week %02d %d, slot %02d %02d." % (rng.randint(1, 52), y, rng.randint(8, 18), rng.choice([0, 30]))
    if k == 20:
        return "invoice", "Member 0%d %04d %04d paid the fee." % (rng.randint(1, 9), rng.randrange(10000),
                                                                 rng.randrange(10000))
    return "ticket", "Locker 0%d, shelf %03d, tag %04d %04d." % (rng.randint(1, 9), rng.randrange(1000),
                                                                rng.randrange(10000), rng.randrange(10000))


def matcher_spans(text):
    spans = set()
    for region in ("GB", "DE"):
        for m in PhoneNumberMatcher(text, region, leniency=Leniency.VALID):
            spans.add((m.start, m.end))
    return ",".join("%d-%d" % s for s in sorted(spans)) or "-"


def main():
    seed = int(sys.argv[1]) if len(sys.argv) > 1 else 20261211
    here = os.path.dirname(os.path.abspath(__file__))
    out = sys.argv[2] if len(sys.argv) > 2 else os.path.join(here, "..", "data", "screen",
                                                             "grouped_phones_%d.tsv" % seed)
    rng = random.Random(seed)
    heldout = seed != 20261211
    rows = []
    for i in range(400):
        uk = i % 3 != 2
        if i % 10 == 9:
            frame = rng.choice(WORD_FRAMES)
            label = "uk-word" if uk else "de-word"
        elif heldout and i % 10 == 4:
            frame = rng.choice(HELDOUT_FRAMES)
            label = "uk-heldout" if uk else "de-heldout"
        else:
            frame = rng.choice(UK_FRAMES if uk else DE_FRAMES)
            label = "uk" if uk else "de"
        n = uk_number(rng) if uk else de_number(rng)
        text = frame.format(n=n, name=rng.choice(NAMES), tool=rng.choice(TOOLS))
        b = text.index(n)
        rows.append(("planted", label, text, "%d-%d" % (b, b + len(n))))
    for j in range(600):
        label, text = heldout_decoy(rng) if heldout and j % 6 == 5 else decoys(rng)
        rows.append(("decoy", label, text, "-"))
    rng.shuffle(rows)
    with open(out, "w") as f:
        f.write("# made by tests/reference/screen_grouped_phones.py %d with python3-phonenumbers %s\n"
                % (seed, phonenumbers.__version__))
        for role, label, text, planted in rows:
            assert "\t" not in text and text.isascii()
            f.write("\t".join([role, label, text, planted, matcher_spans(text)]) + "\n")
    print("wrote %d rows to %s" % (len(rows), out))


if __name__ == "__main__":
    main()
