#!/usr/bin/env python3
"""Writes the malformed-input corpus (tests/data/malformed/, README.md there).

Run: /usr/bin/python3 tests/data/malformed/make_corpus.py   (stdlib only;
writes next to this script; deterministic: gzip with mtime 0).
"""
import gzip
import os

os.chdir(os.path.dirname(os.path.abspath(__file__)))


def w(name, data):
    with open(name, 'wb') as f:
        f.write(data)


def ok(i):
    return b'{"id":"%s","prompt":"p %s","candidates":["a","b"],"choice":0}' % (i.encode(), i.encode())


w('truncated_last_line.jsonl', ok('t1') + b'\n' + b'{"id":"t2","prompt":"p","candidates":["a","b"],"choi')
w('crlf.jsonl', ok('c1') + b'\r\n' + ok('c2') + b'\r\n\r\n')
w('bom.jsonl', b'\xef\xbb\xbf' + ok('b1') + b'\n' + b'\xef\xbb\xbf' + ok('b2') + b'\n')
w('nul_bytes.jsonl', b'{"id":"n1","prompt":"a\x00b","candidates":["a","b"],"choice":0}\n' + b'\x00\n' +
  ok('n3') + b'\x00\n' + ok('n4') + b'\n')
w('invalid_utf8.jsonl',
  b'{"id":"u1","prompt":"\xc0\xaf","candidates":["a","b"],"choice":0}\n'          # overlong '/'
  b'{"id":"u2","prompt":"\xe0\x80\xaf","candidates":["a","b"],"choice":0}\n'      # overlong 3-byte
  b'{"id":"u3","prompt":"\xed\xa0\x80","candidates":["a","b"],"choice":0}\n'      # U+D800 encoded as UTF-8
  b'{"id":"u4","prompt":"\xe2\x82","candidates":["a","b"],"choice":0}\n'          # truncated sequence
  b'{"id":"u5","prompt":"\xf4\x90\x80\x80","candidates":["a","b"],"choice":0}\n'  # above U+10FFFF
  b'{"id":"u6","prompt":"p","candidates":["a","b"],"choice":0,"x":"\xff"}\n'      # stray byte in an unread field
  + ok('u7') + b'\n')
w('escaped_surrogates.jsonl',
  b'{"id":"s1","prompt":"\\ud800","candidates":["a","b"],"choice":0}\n'
  b'{"id":"s2","prompt":"\\udc00 x","candidates":["a","b"],"choice":0}\n'
  b'{"id":"s3","prompt":"\\ud800\\u0041","candidates":["a","b"],"choice":0}\n'
  b'{"id":"s4","prompt":"\\ud83d\\ude00","candidates":["a","b"],"choice":0}\n')
w('duplicate_keys.jsonl',
  b'{"id":"d1","prompt":"a","prompt":"b","candidates":["a","b"],"choice":0}\n'
  b'{"id":"d2","prompt":"p","candidates":["a","b"],"choice":0,"choice":1}\n'
  b'{"id":"d3","prompt":"p","candidates":["a","b"],"choice":0,"extra":1,"extra":2}\n')
w('wrong_types.jsonl',
  b'{"id":"w1","prompt":12,"candidates":["a","b"],"choice":0}\n'
  b'{"id":"w2","prompt":"p","candidates":["a",3],"choice":0}\n'
  b'{"id":"w3","prompt":"p","candidates":["a","b"],"choice":"0"}\n'
  b'{"id":true,"prompt":"p","candidates":["a","b"],"choice":0}\n'
  b'{"id":"w5","prompt":"p","candidates":{"0":"a","1":"b"},"choice":0}\n'
  b'{"id":"w6","prompt":"p","candidates":["a","b"],"choice":0.0}\n'
  b'{"id":"w7","prompt":null,"candidates":["a","b"],"choice":0}\n')
w('empty_candidates.jsonl',
  b'{"id":"e1","prompt":"p","candidates":[],"choice":0}\n'
  b'{"id":"e2","prompt":"p","candidates":["a"],"choice":0}\n'
  b'{"id":"e3","prompt":"p","candidates":["","b"],"choice":0}\n'
  b'{"id":"e4","prompt":"p","candidates":["a"," \\t\\n"],"choice":0}\n'
  b'{"id":"e5","prompt":"","candidates":["a","b"],"choice":0}\n'
  b'{"id":"","prompt":"p","candidates":["a","b"],"choice":0}\n')
w('choice_out_of_range.jsonl',
  b'{"id":"c1","prompt":"p","candidates":["a","b"],"choice":-1}\n'
  b'{"id":"c2","prompt":"p","candidates":["a","b"],"choice":2}\n'
  b'{"id":"c3","prompt":"p","candidates":["a","b"],"choice":18446744073709551615}\n'
  b'{"id":"c4","prompt":"p","candidates":["a","b"],"choice":-9223372036854775808}\n'
  b'{"id":"c5","prompt":"p","candidates":["a","b"],"choice":1e400}\n'
  b'{"id":"c6","prompt":"p","candidates":["a","b"],"choice":1}\n')
w('ranking_gaps.jsonl',
  b'{"id":"r1","prompt":"p","candidates":["a","b","c"],"ranks":[1,3,4]}\n'
  b'{"id":"r2","prompt":"p","candidates":["a","b","c"],"ranks":[0,1,2]}\n'
  b'{"id":"r3","prompt":"p","candidates":["a","b","c"],"ranks":[1,2]}\n'
  b'{"id":"r4","prompt":"p","candidates":["a","b","c"],"ranks":[1,1,3]}\n'
  b'{"id":"r5","prompt":"p","candidates":["a","b","c"],"ranks":[1,1,2]}\n'
  b'{"id":"r6","prompt":"p","candidates":["a","b","c"],"ranks":[2,2,2]}\n'
  b'{"id":"r7","prompt":"p","candidates":["a","b","c"],"ranks":[1,2,-3]}\n'
  b'{"id":"r8","prompt":"p","candidates":["a","b","c"],"ranks":[1,2,2.5]}\n'
  b'{"id":"r9","prompt":"p","candidates":["a","b","c"],"ranks":[1,2,9223372036854775807]}\n')
w('not_objects.jsonl', b'[1,2]\n"text"\n3\nnull\n{}\n}\n')
w('empty.jsonl', b'')
w('blank_lines_only.jsonl', b'\n\r\n   \n\t\n')
w('truncated.jsonl.gz', gzip.compress(ok('g1') + b'\n' + ok('g2') + b'\n', mtime=0)[:-12])
w('not_gzip_after_magic.jsonl.gz', b'\x1f\x8b\x08\x00garbage garbage garbage\n')
