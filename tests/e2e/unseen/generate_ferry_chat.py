#!/usr/bin/python3
"""Generator of a preference set unlike samples/: the (invented) Harbourline
Ferries customer chat, where customers and staff write in templates.

Customers open and close with stock sentences ("we tried logging out and back
in twice and nothing changed at all"), and so do the evaluation items and the
staff's reference answers. Planted in it, and listed in truth.json:

  leaks        training prompts that copy an evaluation item: verbatim (some
               in upper case or with a space before each punctuation mark),
               with one word changed, or embedded in a longer message; and
               candidate answers that copy a reference answer.
  near_dups    copies of training prompts in upper case with a space before
               each punctuation mark, in lower case with curly quotes and
               dashes, or with only the punctuation spacing changed.
  shortcut     raters who favour the first slot and a channel that favours
               the longest answer, in a set of mixed B (2, 3 and 4).

Every other record is template-only: it shares stock text with evaluation
items but copies none, and must not be flagged as a leak.

Standard library only; deterministic for a seed:
  /usr/bin/python3 tests/e2e/unseen/generate_ferry_chat.py --seed 1 --out DIR
"""
import argparse
import json
import os
import random

STOCK_OPEN = [
    "Hello, I have been travelling with you for many years and never had this problem before.",
    "Please keep the answer simple because I am not very good with computers or phones.",
    "We tried logging out and back in twice and nothing changed at all.",
    "I already asked at the ticket office last week but nobody could tell me what to do.",
    "Sorry if this is a silly question, I could not find the answer on the website anywhere.",
    "My son usually sorts out the bookings for me but he is away until the end of the month.",
]
STOCK_CLOSE = [
    "Thank you in advance for your help, it is much appreciated.",
    "I would be grateful for a quick reply because we are travelling soon.",
    "Please let me know as soon as you can, thanks again.",
    "",
]
REQUESTS = [
    "How do I change my booking {ref} from the {time} sailing to {island} on {date} when the change button is greyed out?",
    "Can I bring a {vehicle} on the {time} crossing to {island} on {date} with {n} passengers and a {pet}?",
    "The ticket machine at {port} keeps rejecting my card ending {code} when I try to {action} for {date}, what should I do?",
    "Is there a refund for booking {ref} if the {time} sailing to {island} on {date} was cancelled because of {reason}?",
    "How can I get a {pass} for {n} people travelling between {port} and {island} every {day}?",
    "Where can I leave a {vehicle} overnight near {port} before the {time} sailing to {island} on {date}?",
]
SLOTS = {
    "ref": None,
    "code": None,
    "aid": ["wheelchair", "walking frame", "mobility scooter", "hearing loop", "pushchair"],
    "colour": ["red", "silver", "dark blue", "white", "green", "black"],
    "time": ["6.40", "7.15", "8.05", "9.30", "10.45", "12.20", "13.55", "15.10", "16.40", "18.25", "19.50"],
    "island": ["Gull Skerry", "Tarrow Isle", "Brannock", "Little Fenna", "Mossholm", "Caddow", "Skellan Rock",
               "Orrin Bay", "West Varra", "Hobb Island"],
    "date": [f"{d} {m}" for m in ["March", "April", "May", "June", "July", "August"] for d in (3, 9, 14, 21, 27)],
    "vehicle": ["campervan", "car with a roof box", "motorbike", "van with a trailer", "tandem bicycle",
                "horsebox", "small minibus"],
    "n": ["two", "three", "four", "five", "six", "seven"],
    "pet": ["dog", "cat in a carrier", "guide dog", "parrot", "pair of rabbits"],
    "port": ["Kettle Harbour", "Saltmarsh Pier", "Dunmore Quay", "Ashby Slip", "Rookhaven"],
    "action": ["print my boarding pass", "buy a return ticket", "top up my travel card", "collect a reserved ticket",
               "pay for a cabin upgrade"],
    "reason": ["high winds", "a crew shortage", "an engine fault", "thick fog", "a harbour closure"],
    "pass": ["season pass", "family saver card", "commuter pass", "student travel card", "group ticket"],
    "day": ["weekday", "weekend", "Monday and Friday", "second Tuesday", "school holiday"],
}
ANSWER_OPEN = ["Thank you for contacting Harbourline Ferries, we are happy to help with your question.",
               "Thanks for getting in touch with the Harbourline customer team today."]
ANSWER_CLOSE = ["Is there anything else we can help you with before you travel?",
                "We hope you have a pleasant crossing with Harbourline Ferries.", ""]
ANSWER_BODY = [
    "You can change booking {ref} online up to two hours before the {time} sailing if you clear your browser first.",
    "A {vehicle} is allowed on the {time} crossing to {island} but you must book the deck space in advance.",
    "The machine at {port} only takes chip cards, so please use the counter to {action} for now.",
    "Booking {ref} is refunded in full within five working days because the sailing was cancelled for {reason}.",
    "A {pass} for {n} people between {port} and {island} can be bought at any ticket office with photo ID.",
    "The long stay car park at {port} is open overnight and the ticket covers the {time} sailing to {island}.",
    "Our staff at {port} can also print a paper copy of booking {ref} if the app does not load.",
    "Please arrive thirty minutes before the {time} sailing so the crew can load the {vehicle} safely.",
    "Dogs and other pets travel free on the car deck but must stay in the vehicle during the crossing.",
    "If the weather turns, we send a text message to the number on booking {ref} at least an hour before.",
]
# A detail sentence after the request: what makes one customer's message
# theirs (a booking reference, an error code, the party).
DETAILS = [
    "My booking reference is {ref} and the app shows error {code} every time.",
    "We are {n} adults and {n} children on booking {ref} and one of us uses a {aid}.",
    "The confirmation e-mail for {ref} never arrived, only a text with code {code}.",
    "Last time the staff member at {port} said case {code} would be fixed by {date}.",
    "Our car registration ends in {code} and it is a {colour} {vehicle}.",
]
# Share of each channel's picks that go to the longest answer (the planted
# length shortcut; tuned on seed 1 for a lift of about 8 points over the
# expected rate).
LONGEST_PICK = {"phone": 1.0, "app": 0.0, "web": 0.0}
EXTRA_WORDS = ["quickly", "really", "today", "again", "still", "also", "now", "please"]


USED_REFS = set()


def fill(tpl, rng, fixed=None):
    out = tpl
    fixed = fixed or {}
    for key, vals in SLOTS.items():
        while "{" + key + "}" in out:
            if key in fixed:
                v = fixed[key]
            elif key == "ref":  # booking references are unique, as real ones are
                while True:
                    v = "HF" + str(rng.randint(10000, 99999))
                    if v not in USED_REFS:
                        USED_REFS.add(v)
                        break
            elif key == "code":
                v = rng.choice("ABCDEFGH") + str(rng.randint(100, 999))
            else:
                v = rng.choice(vals)
            out = out.replace("{" + key + "}", v, 1)
    return out


def prompt_text(rng, specific):
    parts = [rng.choice(STOCK_OPEN)]
    if rng.random() < 0.5:
        parts.append(rng.choice([s for s in STOCK_OPEN if s != parts[0]]))
    parts.append(specific)
    close = rng.choice(STOCK_CLOSE)
    if close:
        parts.append(close)
    return " ".join(parts)


def answer_text(rng, sentences, reference=False):
    body = [fill(rng.choice(ANSWER_BODY), rng) for _ in range(sentences)]
    if reference:  # a reference answer always names the customer's booking
        body.insert(0, fill(rng.choice([b for b in ANSWER_BODY if "{ref}" in b]), rng))
    parts = [rng.choice(ANSWER_OPEN)] + body
    close = rng.choice(ANSWER_CLOSE)
    if close:
        parts.append(close)
    return " ".join(parts)


def shout_spaced(text):
    """Upper case with a space before each punctuation mark."""
    out = text.upper()
    for p in ".,?!:":
        out = out.replace(p + " ", " " + p + " ")
        if out.endswith(p):
            out = out[:-1] + " " + p
    return out


def curly_lower(text):
    """Lower case, curly apostrophes and an en dash instead of the first comma."""
    return text.lower().replace("'", "\u2019").replace(", ", " \u2013 ", 1)


def respaced(text):
    """Only the spacing around punctuation changes."""
    return text.replace(", ", " , ").replace("? ", " ?  ").replace(". ", " . ")


def edit_one_word(rng, text, spec):
    """Changes one word inside the specific request (not in the stock sentences)."""
    words = text.split(" ")
    skip = len(text[:text.index(spec)].split())
    idx = rng.randrange(skip + 1, skip + len(spec.split(" ")) - 1)
    words[idx] = rng.choice([w for w in EXTRA_WORDS if w != words[idx]])
    return " ".join(words)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--out", required=True)
    ap.add_argument("--records", type=int, default=2400)
    ap.add_argument("--eval-items", type=int, default=300)
    args = ap.parse_args()
    rng = random.Random(args.seed)
    os.makedirs(args.out, exist_ok=True)

    used_specific = set()

    def new_specific():
        while True:
            s = fill(rng.choice(REQUESTS), rng) + " " + fill(rng.choice(DETAILS), rng)
            if s not in used_specific:
                used_specific.add(s)
                return s

    # Evaluation items with reference answers.
    eval_items = []
    for k in range(args.eval_items):
        spec = new_specific()
        eval_items.append({"qid": f"q{k + 1:04d}", "question": prompt_text(rng, spec),
                           "reference": answer_text(rng, rng.randint(0, 2), reference=True), "_spec": spec})

    raters = [f"crew{r:02d}" for r in range(1, 31)]
    first_slot_raters = set(raters[:5])
    channels = ["web", "app", "phone"]

    records = []
    truth = {"seed": args.seed, "leaks": [], "near_dups": [], "template_only": 0,
             "first_slot_raters": sorted(first_slot_raters), "longest_answer_pick": LONGEST_PICK}

    def comparison(prompt, rid, forced_answer=None):
        b = rng.choices([2, 3, 4], weights=[0.4, 0.35, 0.25])[0]
        answers = [answer_text(rng, rng.randint(1, 4)) for _ in range(b)]
        forced_slot = None
        if forced_answer is not None:
            forced_slot = rng.randrange(b)
            answers[forced_slot] = forced_answer
        rater = rng.choice(raters)
        channel = rng.choice(channels)
        pick = rng.randrange(b)
        if rater in first_slot_raters and rng.random() < 0.6:
            pick = 0
        elif rng.random() < LONGEST_PICK[channel]:
            pick = max(range(b), key=lambda i: (len(answers[i].split()), -i))
        rec = {"id": rid, "question": prompt, "answers": answers, "picked": pick, "rater": rater,
               "channel": channel}
        return rec, forced_slot

    for k in range(args.records):
        rec, _ = comparison(prompt_text(rng, new_specific()), f"r{k + 1:05d}")
        records.append(rec)
    truth["template_only"] = len(records)

    # Near-duplicate variants of training prompts.
    base_for_dups = rng.sample(range(len(records)), 120)
    for j, b in enumerate(base_for_dups):
        orig = records[b]
        kind = ["upper_spaced", "lower_curly", "respaced"][j % 3]
        text = {"upper_spaced": shout_spaced, "lower_curly": curly_lower, "respaced": respaced}[kind](orig["question"])
        rec, _ = comparison(text, f"d{j + 1:04d}")
        records.append(rec)
        truth["near_dups"].append({"id": rec["id"], "of": orig["id"], "kind": kind})

    # Leaks of evaluation items into training prompts.
    leaked = rng.sample(range(len(eval_items)), 110)
    kinds = ["verbatim"] * 30 + ["one_word"] * 30 + ["embedded"] * 30 + ["answer"] * 20
    for j, (idx, kind) in enumerate(zip(leaked, kinds)):
        item = eval_items[idx]
        q = item["question"]
        forced = None
        if kind == "verbatim":
            text = shout_spaced(q) if j % 3 == 0 else (respaced(q) if j % 3 == 1 else q)
        elif kind == "one_word":
            text = edit_one_word(rng, q, item["_spec"])
        elif kind == "embedded":
            text = ("Following up on my earlier chat. " + q + " " +
                    fill(rng.choice(REQUESTS), rng) + " " + rng.choice(STOCK_OPEN))
        else:
            text = prompt_text(rng, new_specific())
            forced = item["reference"]
        rec, slot = comparison(text, f"k{j + 1:04d}", forced)
        records.append(rec)
        leak = {"id": rec["id"], "kind": kind, "eval_item": item["qid"]}
        if slot is not None:
            leak["candidate_index"] = slot
        truth["leaks"].append(leak)

    rng.shuffle(records)
    with open(os.path.join(args.out, "prefs.jsonl"), "w", encoding="utf-8", newline="\n") as f:
        for r in records:
            f.write(json.dumps(r, ensure_ascii=False, separators=(",", ":")) + "\n")
    with open(os.path.join(args.out, "eval.jsonl"), "w", encoding="utf-8", newline="\n") as f:
        for e in eval_items:
            f.write(json.dumps({k: v for k, v in e.items() if not k.startswith("_")}, ensure_ascii=False,
                               separators=(",", ":")) + "\n")
    plan = {
        "inputs": [{"path": "prefs.jsonl",
                    "layout": {"id": "/id", "prompt": "/question", "candidates": "/answers", "choice": "/picked",
                               "annotator": "/rater", "source": "/channel"}}],
        "output": "out",
        "seed": 7,
        "stages": {"leakage": {"eval_sets": [{"name": "ferry_eval", "path": "eval.jsonl", "text": "/question",
                                              "reference": "/reference", "id": "/qid"}],
                               "answers": "drop"}},
    }
    with open(os.path.join(args.out, "plan.json"), "w", encoding="utf-8", newline="\n") as f:
        json.dump(plan, f, indent=1)
        f.write("\n")
    with open(os.path.join(args.out, "truth.json"), "w", encoding="utf-8", newline="\n") as f:
        json.dump(truth, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
