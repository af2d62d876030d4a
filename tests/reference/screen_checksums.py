#!/usr/bin/python3
"""Reference verdicts for the screen's checksum validators, from python3-stdnum.

Writes tests/data/screen/checksums.tsv: kind<TAB>value<TAB>expected(0|1), where
expected is python3-stdnum's is_valid() verdict:
  luhn        stdnum.luhn.is_valid
  iban        stdnum.iban.is_valid(check_country=False)  (IBAN-level checks:
              registry length and BBAN structure, MOD 97-10; the per-country
              national account checks are out of the screen's scope)
  us_ssn      stdnum.us.ssn.is_valid
  nl_bsn      stdnum.nl.bsn.is_valid
  es_dni      stdnum.es.dni.is_valid / stdnum.es.nie.is_valid
  fr_nir      stdnum.fr.nir.is_valid
  in_aadhaar  stdnum.in_.aadhaar.is_valid
  it_cf       stdnum.it.codicefiscale.is_valid (16-character personal codes)
All values are generated random digits (seeded); none targets a real person.
Regenerate:  /usr/bin/python3 tests/reference/screen_checksums.py  (from the repo root);
             an optional argument writes to that path instead.
"""
import os
import random
import sys
import re

from stdnum import iban, luhn
from stdnum.es import dni, nie
from stdnum.fr import nir
from stdnum.in_ import aadhaar
from stdnum.nl import bsn
from stdnum.us import ssn

rng = random.Random(20261202)
rows = []
D = '0123456789'
A = 'ABCDEFGHIJKLMNOPQRSTUVWXYZ'


def digits(n):
    return ''.join(rng.choice(D) for _ in range(n))


def add(kind, value, ok):
    rows.append((kind, value, 1 if ok else 0))


# Luhn: random strings (about 1 in 10 valid) plus completed valid ones and
# one-digit corruptions of them.
for _ in range(2500):
    v = digits(rng.randint(2, 19))
    add('luhn', v, luhn.is_valid(v))
for _ in range(1500):
    body = digits(rng.randint(1, 18))
    v = body + luhn.calc_check_digit(body)
    add('luhn', v, luhn.is_valid(v))
    i = rng.randrange(len(v))
    w = v[:i] + rng.choice(D.replace(v[i], '')) + v[i + 1:]
    add('luhn', w, luhn.is_valid(w))

# IBAN: every country in stdnum's registry, BBAN built from its structure.
reg = {}
dat = os.path.join(os.path.dirname(iban.__file__), 'iban.dat')
for line in open(dat):
    m = re.match(r'^([A-Z]{2}) .*bban="([^"]+)"', line)
    if m:
        reg[m.group(1)] = m.group(2)


def bban(struct):
    out = ''
    for n, t in re.findall(r'(\d+)!([nac])', struct):
        for _ in range(int(n)):
            out += rng.choice({'n': D, 'a': A, 'c': D + A}[t])
    return out


def spaced(v):
    return ' '.join(v[i:i + 4] for i in range(0, len(v), 4)) if rng.random() < 0.5 else v


for cc, struct in sorted(reg.items()):
    for _ in range(25):
        b = bban(struct)
        v = cc + iban.calc_check_digits(cc + '00' + b) + b
        add('iban', spaced(v), iban.is_valid(v, check_country=False))
        # wrong check digits
        w = v[:2] + '%02d' % rng.randint(0, 99) + v[4:]
        add('iban', spaced(w), iban.is_valid(w, check_country=False))
        # one digit of the BBAN changed (keeps the structure)
        pos = [i for i in range(4, len(v)) if v[i].isdigit()]
        if pos:
            i = rng.choice(pos)
            w = v[:i] + rng.choice(D.replace(v[i], '')) + v[i + 1:]
            add('iban', spaced(w), iban.is_valid(w, check_country=False))
        # one character dropped or added (length wrong)
        i = rng.randrange(4, len(v))
        add('iban', v[:i] + v[i + 1:], iban.is_valid(v[:i] + v[i + 1:], check_country=False))
        w = v[:i] + rng.choice(D) + v[i:]
        add('iban', w, iban.is_valid(w, check_country=False))
# unknown country codes
for cc in ['AA', 'ZZ', 'US', 'CA']:
    b = digits(18)
    v = cc + iban.calc_check_digits(cc + '00' + b) + b
    add('iban', v, iban.is_valid(v, check_country=False))

# US SSN: areas, groups and serials biased towards the never-issued ones.
for _ in range(2000):
    area = rng.choice(['000', '666', '9' + digits(2), digits(3), digits(3)])
    group = rng.choice(['00', digits(2), digits(2), digits(2)])
    serial = rng.choice(['0000', digits(4), digits(4), digits(4)])
    v = '%s-%s-%s' % (area, group, serial)
    add('us_ssn', v, ssn.is_valid(v))
for v in ['078-05-1120', '457-55-5462', '219-09-9999', '123-45-6789', '000-12-3456', '666-12-3456',
          '912-34-5678', '123-00-4567', '123-45-0000']:
    add('us_ssn', v, ssn.is_valid(v))

# Dutch BSN: random 9 digits (about 1 in 11 valid) and completed valid ones.
for _ in range(2000):
    v = digits(9)
    add('nl_bsn', v, bsn.is_valid(v))
for _ in range(1000):
    body = digits(8)
    s = sum((9 - i) * int(c) for i, c in enumerate(body)) % 11
    if s == 10:
        continue
    v = body + str(s)
    add('nl_bsn', v, bsn.is_valid(v))

# Spanish DNI and NIE.
L = 'TRWAGMYFPDXBNJZSQVHLCKE'
for _ in range(1500):
    n = digits(8)
    v = n + (dni.calc_check_digit(n) if rng.random() < 0.5 else rng.choice(L))
    add('es_dni', v, dni.is_valid(v))
    p = rng.choice('XYZ') + digits(7)
    v = p + (nie.calc_check_digit(p) if rng.random() < 0.5 else rng.choice(L))
    add('es_dni', v, nie.is_valid(v))

# French NIR (incl. Corsica 2A/2B).
for _ in range(2000):
    dept = rng.choice(['2A', '2B', digits(2), digits(2), digits(2)])
    body = rng.choice('12') + digits(2) + '%02d' % rng.randint(1, 12) + dept + digits(6)
    key = nir.calc_check_digits(body + '00')
    if rng.random() < 0.5:
        key = '%02d' % rng.randint(0, 99)
    v = body + key
    add('fr_nir', v, nir.is_valid(v))

# Aadhaar: random 12 digits, completed Verhoeff-valid ones, palindromes.
from stdnum import verhoeff
for _ in range(1500):
    v = digits(12)
    add('in_aadhaar', v, aadhaar.is_valid(v))
    body = rng.choice('23456789') + digits(10)
    v = body + verhoeff.calc_check_digit(body)
    add('in_aadhaar', v, aadhaar.is_valid(v))
for _ in range(50):
    h = rng.choice('23456789') + digits(5)
    v = h + h[::-1]
    add('in_aadhaar', v, aadhaar.is_valid(v))

# Italian codice fiscale: structure-following codes, half with the right
# check letter, days up to 71 (women +40) so some dates do not exist.
from stdnum.it import codicefiscale
OMO = 'LMNPQRSTUV'


def cf_digit(d):
    return OMO[int(d)] if rng.random() < 0.1 else d


for _ in range(2000):
    day = rng.randint(0, 31) + (40 if rng.random() < 0.5 else 0)
    body = (''.join(rng.choice(A) for _ in range(6)) + ''.join(cf_digit(c) for c in digits(2)) +
            rng.choice('ABCDEHLMPRST') + ''.join(cf_digit(c) for c in '%02d' % day) +
            rng.choice(A) + ''.join(cf_digit(c) for c in digits(3)))
    check = codicefiscale.calc_check_digit(body) if rng.random() < 0.6 else rng.choice(A)
    v = body + check
    add('it_cf', v, codicefiscale.is_valid(v))

out = sys.argv[1] if len(sys.argv) > 1 else os.path.join(os.path.dirname(os.path.abspath(__file__)), '..', 'data', 'screen', 'checksums.tsv')
with open(out, 'w') as f:
    f.write('# generated by tests/reference/screen_checksums.py from python3-stdnum; do not edit\n')
    for k, v, e in rows:
        f.write('%s\t%s\t%d\n' % (k, v, e))
print('wrote', len(rows), 'rows to', os.path.normpath(out))
