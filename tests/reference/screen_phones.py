#!/usr/bin/python3
"""Reference verdicts for the screen's phone-number rules, from python3-phonenumbers.

Writes tests/data/screen/phones.tsv: form<TAB>text<TAB>expected(0|1), where form
is E164 or a region (US, GB, DE, FR, IN, JP) for the national format, and
expected = phonenumbers.is_possible_number(phonenumbers.parse(text, region)).

Why is_possible_number and not is_valid_number: the screen can only see a
number's shape and digit count; is_valid_number also checks the number
against the allocated ranges of each national plan, which change over time
and which a pattern screen does not (and should not) track.

Generated set: random digits in the shapes each rule claims to find, with
national-number lengths from two below to two above the country's range.
Lengths that phonenumbers marks "local only" (dialled without an area code,
e.g. 7 digits in the US) are left out: they are not complete numbers.
The digits are random (seeded); no real person's number is targeted.
Regenerate:  /usr/bin/python3 tests/reference/screen_phones.py  (from the repo root);
             an optional argument writes to that path instead.
"""
import os
import random
import sys

import phonenumbers
from phonenumbers import PhoneMetadata

rng = random.Random(20261203)
D = '0123456789'
rows = []


def digits(n, first='123456789'):
    if n <= 0:
        return ''
    return rng.choice(first) + ''.join(rng.choice(D) for _ in range(n - 1))


def possible(text, region):
    try:
        return phonenumbers.is_possible_number(phonenumbers.parse(text, region))
    except phonenumbers.NumberParseException:
        return False


def groups(s, lo, hi, seps):
    out, i = [], 0
    while i < len(s):
        n = rng.randint(lo, hi)
        out.append(s[i:i + n])
        i += n
    sep = rng.choice(seps)
    return sep.join(out)


COUNTRIES = {'US': '1', 'GB': '44', 'DE': '49', 'FR': '33', 'IN': '91', 'JP': '81'}
for region, cc in COUNTRIES.items():
    md = PhoneMetadata.metadata_for_region(region)
    lengths = md.general_desc.possible_length
    local = set(md.general_desc.possible_length_local_only)
    lo, hi = min(lengths) - 2, max(lengths) + 2
    for _ in range(600):
        n = rng.randint(max(lo, 1), hi)
        if n in local:
            continue
        nsn = digits(n, '23456789' if region == 'US' else '123456789')
        g = groups(nsn, 3, 5, [' ', '-', '.'])
        if g.count(' ') + g.count('-') + g.count('.') >= 6:
            continue
        text = '+%s %s' % (cc, g)
        rows.append(('E164', text, possible(text, None)))

# National formats, in the shapes of the rules in rules/contact.json.
for _ in range(800):
    a, b, c = digits(3, '23456789'), digits(3, '23456789'), digits(4, D)
    text = rng.choice(['(%s) %s-%s', '%s-%s-%s', '%s.%s.%s', '(%s)%s-%s']) % (a, b, c)
    rows.append(('US', text, possible(text, 'US')))
gb_local = set(PhoneMetadata.metadata_for_region('GB').general_desc.possible_length_local_only)
while sum(1 for r in rows if r[0] == 'GB') < 800:
    a = digits(rng.randint(2, 5))
    b = digits(rng.randint(3, 4), D)
    c = rng.choice(['', digits(3, D), digits(4, D)])
    if len(a + b + c) in gb_local:
        continue
    sep = rng.choice([' ', '-', ''])
    text = '0' + a + sep + b + ((sep + c) if c else '')
    rows.append(('GB', text, possible(text, 'GB')))
de_local = set(PhoneMetadata.metadata_for_region('DE').general_desc.possible_length_local_only)
while sum(1 for r in rows if r[0] == 'DE') < 800:
    a = digits(rng.randint(2, 5))
    b = digits(rng.randint(2, 8), D)
    c = rng.choice(['', '', digits(rng.randint(1, 5), D)])
    if len(a + b + c) in de_local:
        continue
    text = '0' + a + rng.choice([' ', '/', '-', '']) + b + ((rng.choice([' ', '-']) + c) if c else '')
    rows.append(('DE', text, possible(text, 'DE')))
for _ in range(800):
    pairs = [digits(2, D) for _ in range(4)]
    sep = rng.choice([' ', '.', '-', ''])
    text = '0' + rng.choice('123456789') + sep + sep.join(pairs)
    rows.append(('FR', text, possible(text, 'FR')))
for _ in range(800):
    n = digits(1, '6789') + digits(9, D)
    text = rng.choice(['', '0']) + n[:5] + rng.choice([' ', '-', '']) + n[5:]
    rows.append(('IN', text, possible(text, 'IN')))
# Japan: national numbers of 8 to 12 digits after the trunk 0 (the range the
# shape allows above the plan's minimum); "0" + fewer than 8 digits is left
# out because phonenumbers then keeps the trunk 0 as part of the number, and
# "010" (international access) is left out as it is not a national number.
while sum(1 for r in rows if r[0] == 'JP') < 800:
    a = digits(rng.randint(1, 4))
    b = digits(rng.randint(1, 4), D)
    if len(a + b) + 4 < 8 or (a + b).startswith('10'):
        continue
    text = '0%s-%s-%s' % (a, b, digits(4, D))
    rows.append(('JP', text, possible(text, 'JP')))

out = sys.argv[1] if len(sys.argv) > 1 else os.path.join(os.path.dirname(os.path.abspath(__file__)), '..', 'data', 'screen', 'phones.tsv')
with open(out, 'w') as f:
    f.write('# generated by tests/reference/screen_phones.py from python3-phonenumbers %s; do not edit\n'
            % phonenumbers.__version__)
    for form, text, e in rows:
        f.write('%s\t%s\t%d\n' % (form, text, 1 if e else 0))
print('wrote', len(rows), 'rows to', os.path.normpath(out))
