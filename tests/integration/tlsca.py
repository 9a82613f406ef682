#!/usr/bin/python3
"""tlsca - throwaway certificates for the TLS tests (RELIABILITY.md T22).

make_certs(DIR) runs the openssl command line and writes, in DIR:

  ca.pem / ca.key            the test CA (the one a test configures as the
                             daemon's CA file)
  good.pem / good.key        server cert for IP:127.0.0.1 and DNS:localhost,
                             signed by the test CA: must be accepted
  wronghost.pem / .key       signed by the test CA, but only for
                             DNS:wrong.invalid: must fail the host check
  selfsigned.pem / .key      self-signed, right names: must fail trust
  untrusted.pem / .key       right names, signed by another CA
                             (other-ca.pem), not the configured one
  expired.pem / .key         signed by the test CA, right names, valid
                             from 2020-01-01 to 2020-01-02 (made with
                             `openssl ca -startdate/-enddate`, which
                             OpenSSL 3.0 has; `x509 -not_before` is 3.4+)

It returns {"dir", "ca", "certs": {kind: (cert, key)}, "skipped":
{kind: reason}}.  A kind openssl cannot make is left out of "certs" and
listed in "skipped" with the reason; only "expired" can be skipped, the
rest raise.  Keys are EC P-256 (quick to make).  Every serve-able kind is
a (cert, key) pair for httpserver.py --tls CERT KEY.

Command line: tlsca.py DIR  - writes the files, prints the dict as JSON.
"""

import json
import os
import subprocess
import sys

GOOD_SAN = "subjectAltName=IP:127.0.0.1,DNS:localhost"
WRONG_SAN = "subjectAltName=DNS:wrong.invalid"

CA_CONF = """\
[ca]
default_ca = testca
[testca]
dir = {dir}
database = {dir}/index.txt
new_certs_dir = {dir}/issued
serial = {dir}/serial
certificate = {dir}/ca.pem
private_key = {dir}/ca.key
default_md = sha256
policy = anything
copy_extensions = copy
unique_subject = no
[anything]
commonName = supplied
"""


class CertError(Exception):
    pass


def _openssl(args, cwd):
    res = subprocess.run(["openssl"] + args, cwd=cwd, capture_output=True,
                         text=True)
    if res.returncode != 0:
        raise CertError("openssl %s: %s" % (args[0], res.stderr.strip()))
    return res


def _key(d, name):
    path = os.path.join(d, name + ".key")
    _openssl(["genpkey", "-algorithm", "EC", "-pkeyopt",
              "ec_paramgen_curve:P-256", "-out", path], d)
    os.chmod(path, 0o600)
    return path


def _ca(d, name, cn):
    key = _key(d, name)
    pem = os.path.join(d, name + ".pem")
    _openssl(["req", "-x509", "-new", "-key", key, "-out", pem,
              "-days", "30", "-subj", "/CN=" + cn,
              "-addext", "basicConstraints=critical,CA:TRUE",
              "-addext", "keyUsage=critical,keyCertSign,cRLSign"], d)
    return pem, key


def _csr(d, name, cn, san):
    key = _key(d, name)
    csr = os.path.join(d, name + ".csr")
    _openssl(["req", "-new", "-key", key, "-out", csr, "-subj", "/CN=" + cn,
              "-addext", san], d)
    return csr, key


def _signed(d, name, cn, san, ca):
    """A leaf signed by ca=(pem, key), carrying san."""
    csr, key = _csr(d, name, cn, san)
    pem = os.path.join(d, name + ".pem")
    _openssl(["x509", "-req", "-in", csr, "-CA", ca[0], "-CAkey", ca[1],
              "-CAcreateserial", "-days", "30", "-out", pem,
              "-copy_extensions", "copy"], d)
    return pem, key


def _selfsigned(d, name):
    key = _key(d, name)
    pem = os.path.join(d, name + ".pem")
    _openssl(["req", "-x509", "-new", "-key", key, "-out", pem,
              "-days", "30", "-subj", "/CN=localhost", "-addext", GOOD_SAN],
             d)
    return pem, key


def _expired(d, ca):
    """Signed by ca with a validity that ended in 2020 (openssl ca)."""
    csr, key = _csr(d, "expired", "localhost", GOOD_SAN)
    cadir = os.path.join(d, "cadb")
    os.makedirs(os.path.join(cadir, "issued"), exist_ok=True)
    open(os.path.join(cadir, "index.txt"), "w").close()
    with open(os.path.join(cadir, "serial"), "w") as f:
        f.write("1000\n")
    conf = os.path.join(cadir, "ca.cnf")
    with open(conf, "w") as f:
        f.write(CA_CONF.format(dir=cadir))
    os.link(ca[0], os.path.join(cadir, "ca.pem"))
    os.link(ca[1], os.path.join(cadir, "ca.key"))
    pem = os.path.join(d, "expired.pem")
    _openssl(["ca", "-batch", "-config", conf, "-in", csr, "-out", pem,
              "-notext", "-startdate", "20200101000000Z",
              "-enddate", "20200102000000Z"], d)
    return pem, key


def make_certs(d):
    """Writes every test certificate into directory d (see module doc)."""
    os.makedirs(d, exist_ok=True)
    ca = _ca(d, "ca", "tidepost test CA")
    other = _ca(d, "other-ca", "tidepost other CA")
    certs = {
        "good": _signed(d, "good", "localhost", GOOD_SAN, ca),
        "wronghost": _signed(d, "wronghost", "wrong.invalid", WRONG_SAN,
                             ca),
        "selfsigned": _selfsigned(d, "selfsigned"),
        "untrusted": _signed(d, "untrusted", "localhost", GOOD_SAN, other),
    }
    skipped = {}
    try:
        certs["expired"] = _expired(d, ca)
    except (CertError, OSError) as e:
        skipped["expired"] = str(e)
    return {"dir": d, "ca": ca[0], "other_ca": other[0], "certs": certs,
            "skipped": skipped}


if __name__ == "__main__":
    if len(sys.argv) != 2:
        print("usage: tlsca.py DIR", file=sys.stderr)
        sys.exit(64)
    try:
        print(json.dumps(make_certs(sys.argv[1]), indent=1))
    except CertError as e:
        print("tlsca: %s" % e, file=sys.stderr)
        sys.exit(1)
