#!/usr/bin/python3
"""Reference fixture for prefsift's shingling (tests/sketch/shingles_test.cc).

Independent of the C++ code: Python's own str (code points), re and
unicodedata (Unicode character names) compute, for a deterministic set of
texts in several scripts:
  texts.tsv  index, word count, code-point count, share of non-space code
             points whose Unicode name marks a script written without spaces
             (CJK/Han, Hiragana, Katakana, Hangul, Thai, Lao, Khmer, Myanmar),
             and the text;
  pairs.tsv  i, j, exact Jaccard of word 5-gram sets, exact Jaccard of
             code-point 5-gram sets (a text shorter than 5 units is one shingle).

Regenerate (stdlib only):
  /usr/bin/python3 tests/sketch/reference/make_shingle_fixture.py tests/sketch/data
"""
import os
import random
import re
import sys
import unicodedata

N = 5
SPACE = re.compile(r"[ \t\n\r\x0b\x0c]+")
NO_SPACE_NAMES = ("CJK UNIFIED IDEOGRAPH", "CJK COMPATIBILITY IDEOGRAPH", "HIRAGANA",
                  "KATAKANA", "HANGUL", "THAI", "LAO", "KHMER", "MYANMAR")

BASES = [
    "the quick brown fox jumps over the lazy dog while the farmer sleeps under a tree",
    "please summarise the following article about river pollution in three short sentences",
    "write a polite email to a colleague asking to move the meeting to thursday afternoon",
    "explain why the sky looks blue during the day and red at sunset to a ten year old",
    "我们今天去公园散步然后在湖边吃了午饭天气非常好大家都很开心",
    "请把下面这段文字翻译成英文并保持原来的语气和格式不要添加解释",
    "きょうはとてもいいてんきなのでこうえんへさんぽにいきましょう",
    "東京の天気は晴れで気温は二十度くらいになるでしょうと予報されています",
    "오늘은 날씨가 좋아서 친구들과 함께 한강 공원에 산책하러 갔습니다",
    "วันนี้อากาศดีมากเราจึงไปเดินเล่นที่สวนสาธารณะกับเพื่อนๆ",
    "prefsift はデータセットの重複を検出します and reports near duplicates",
    "a b c",
    "短い",
    "",
    "café naïve straße ﬁnal — “quotes” and emoji 🙂 in the middle of words",
    "it's 3.5 kg, isn't it ? yes : e.g. snake_case and 1,000,000 items .",
    "IT'S 3.5 KG , ISN'T IT? YES: E.G. SNAKE_CASE AND 1,000,000 ITEMS.",
]


MID_NUM_LET = set("'.\u2018\u2019\u2024\ufe52\uff07\uff0e")
MID_LETTER = set(":\u00b7\u0387\u055f\u05f4\u2027\ufe13\ufe55\uff1a")
MID_NUM = set(",;\u037e\u0589\u060c\u060d\u066c\u07f8\u2044\ufe10\ufe14\ufe50\ufe54\uff0c\uff1b")


def wclass(ch):
    """Word_Break class, the subset of UAX #29 (Unicode Standard Annex 29,
    section 4.1, table 3) that prefsift uses, from unicodedata categories."""
    if ch in MID_NUM_LET:
        return "MidNumLet"
    if ch in MID_LETTER:
        return "MidLetter"
    if ch in MID_NUM:
        return "MidNum"
    cat = unicodedata.category(ch)
    if ch.isspace() or cat in ("Zs", "Zl", "Zp"):
        return "Space"
    if cat[0] == "L" or cat in ("Nl", "Nd"):
        if unicodedata.name(ch, "").startswith(NO_SPACE_NAMES):
            return "Ideo"
        return "Numeric" if cat == "Nd" else "Letter"
    if cat in ("Mn", "Me", "Mc", "Cf"):
        return "Extend"
    if cat == "Pc":
        return "ExtendNumLet"
    return "Other"


def words(text):
    """UAX #29 word segments holding a letter, digit or no-space-script
    character: rules WB4-WB13b without the Hebrew, Katakana, emoji and
    regional-indicator rules."""
    # WB4: Extend/Format attach to what precedes; drop them for classification.
    units = []  # (class, text)
    for ch in text:
        c = wclass(ch)
        if c == "Extend" and units:
            units[-1] = (units[-1][0], units[-1][1] + ch)
        else:
            units.append((c, ch))
    out = []
    i = 0
    wordish = ("Letter", "Numeric", "ExtendNumLet")
    while i < len(units):
        c, t = units[i]
        if c == "Ideo":
            out.append(t)
            i += 1
            continue
        if c not in wordish:
            i += 1
            continue
        buf = t
        prev = c
        alnum = c != "ExtendNumLet"
        i += 1
        while i < len(units):
            n1 = units[i][0]
            if n1 in wordish:
                buf += units[i][1]
                prev = n1
                alnum = alnum or n1 != "ExtendNumLet"
                i += 1
                continue
            ok_mid = (prev == "Letter" and n1 in ("MidLetter", "MidNumLet")) or \
                     (prev == "Numeric" and n1 in ("MidNum", "MidNumLet"))
            if ok_mid and i + 1 < len(units) and units[i + 1][0] == prev:
                buf += units[i][1] + units[i + 1][1]
                i += 2
                continue
            break
        if alnum:
            out.append(buf)
    return out


def word_grams(text):
    ws = words(text)
    if len(ws) < N:
        return {tuple(ws)}
    return {tuple(ws[i:i + N]) for i in range(len(ws) - N + 1)}


def char_grams(text):
    if len(text) < N:
        return {text}
    return {text[i:i + N] for i in range(len(text) - N + 1)}


def jaccard(a, b):
    if not a and not b:
        return 1.0
    return len(a & b) / len(a | b)


def no_space_share(text):
    total = 0
    hits = 0
    for ch in text:
        if ch.isspace():
            continue
        total += 1
        name = unicodedata.name(ch, "")
        if name.startswith(NO_SPACE_NAMES):
            hits += 1
    return hits / total if total else 0.0


def edit(rng, text):
    """A near copy: replace, drop or swap a few units (words or characters)."""
    ws = words(text)
    if len(ws) >= 6:
        ws = list(ws)
        for _ in range(rng.randint(1, 2)):
            ws[rng.randrange(len(ws))] = rng.choice(["red", "blue", "maybe", "very", "x"])
        return " ".join(ws)
    cs = list(text)
    if len(cs) >= 6:
        for _ in range(rng.randint(1, 2)):
            cs[rng.randrange(len(cs))] = rng.choice("的了是在人一天")
    return "".join(cs)


def main():
    out_dir = sys.argv[1] if len(sys.argv) > 1 else "."
    rng = random.Random(7)
    texts = []
    for base in BASES:
        texts.append(base)
        texts.append(edit(rng, base))
    with open(os.path.join(out_dir, "texts.tsv"), "w", encoding="utf-8", newline="\n") as f:
        f.write("# generated by tests/sketch/reference/make_shingle_fixture.py (Python stdlib)\n")
        for i, t in enumerate(texts):
            f.write(f"{i}\t{len(words(t))}\t{len(t)}\t{no_space_share(t):.6f}\t{t}\n")
    with open(os.path.join(out_dir, "pairs.tsv"), "w", encoding="utf-8", newline="\n") as f:
        f.write("# generated by tests/sketch/reference/make_shingle_fixture.py (Python stdlib)\n")
        for i in range(len(texts)):
            for j in range(i + 1, len(texts)):
                wj = jaccard(word_grams(texts[i]), word_grams(texts[j]))
                cj = jaccard(char_grams(texts[i]), char_grams(texts[j]))
                f.write(f"{i}\t{j}\t{wj:.6f}\t{cj:.6f}\n")


if __name__ == "__main__":
    main()
