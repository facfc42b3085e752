#!/usr/bin/python3
"""The audit's signature checked both ways against Debian's python3-jwcrypto, a general-purpose
JOSE library (RFC 7515 JWS, RFC 7517 JWK, RFC 7638 thumbprints, RFC 8037 EdDSA):

  1. a signature that `stepledger select --sign-key` writes verifies with jwcrypto, given only the
     audit's seal as the detached payload (RFC 7515 Appendix F) and the audit's JWK, or the key;
     its kid is jwcrypto's RFC 7638 thumbprint of the key; and jwcrypto, signing the same header
     text over the same seal with the same key, writes the very same JWS (Ed25519 is
     deterministic, RFC 8032 §5.1.6);
  2. a JWS that jwcrypto makes over a stepledger seal with stepledger's key, detached and put into
     the audit, verifies with `stepledger verify`, with the public key as a JWK, as PEM and as
     recorded; its header is serialised with white space, which the verifier must take as written;
  3. controls: a jwcrypto JWS over another seal, or without a kid, does not verify (exit 1);
  4. the RFC 8037 Appendix A values that tests/audit/jws_test.cpp reproduces (recalled from
     memory there) come out of jwcrypto too: the A.3 thumbprint and the A.4 JWS.

Usage: jws_interop_test.py STEPLEDGER SOURCE_DIR. Exit 0 when every check holds, 1 otherwise. A
missing python3-jwcrypto fails the test (scripts/setup-debian.sh installs it).
"""

import base64
import json
import os
import subprocess
import sys
import tempfile

try:
    from jwcrypto import jwk, jws
    from jwcrypto.common import JWException
except ImportError as error:
    print(f"FAIL: python3-jwcrypto is missing for {sys.executable} ({error}); "
          "scripts/setup-debian.sh installs it", file=sys.stderr)
    sys.exit(1)

failures = []


def check(condition, what):
    print(("ok   " if condition else "FAIL ") + what)
    if not condition:
        failures.append(what)


def b64url(data):
    return base64.urlsafe_b64encode(data).rstrip(b"=").decode("ascii")


def b64url_decode(text):
    return base64.urlsafe_b64decode(text + "=" * (-len(text) % 4))


def attached(detached_jws, seal):
    """RFC 7515 Appendix F: the recipient puts BASE64URL(payload) back between the two dots."""
    header, empty, signature = detached_jws.split(".")
    assert empty == "", detached_jws
    return header + "." + b64url(seal.encode("ascii")) + "." + signature


def jwcrypto_verifies(compact, key):
    token = jws.JWS()
    try:
        token.deserialize(compact)
        token.verify(key)
        return True
    except JWException:
        return False


def stepledger(binary, args, cwd):
    return subprocess.run([binary] + args, cwd=cwd, capture_output=True, text=True)


def main():
    if len(sys.argv) != 3:
        raise SystemExit(__doc__)
    binary, source = os.path.abspath(sys.argv[1]), os.path.abspath(sys.argv[2])
    fixture = os.path.join(source, "tests", "audit", "format_v1")

    # -- 4. RFC 8037 Appendix A through jwcrypto (the values of tests/audit/jws_test.cpp) -------
    rfc_key = jwk.JWK(kty="OKP", crv="Ed25519", d="nWGxne_9WmC6hEr0kuwsxERJxWl7MmkZcDusAxyuf2A",
                      x="11qYAYKxCrfVS_7TyWQHOg7hcvPapiMlrwIaaPcHURo")
    check(rfc_key.thumbprint() == "kPrK_qmxVWaYVA9wwBF6Iuo3vVzz7TxHCTwXBygrS4k",
          "RFC 8037 A.3: jwcrypto's thumbprint of the A.1 key is the one jws_test.cpp uses")
    example = jws.JWS(b"Example of Ed25519 signing")
    example.add_signature(rfc_key, alg=None, protected='{"alg":"EdDSA"}')
    check(example.serialize(compact=True) ==
          "eyJhbGciOiJFZERTQSJ9.RXhhbXBsZSBvZiBFZDI1NTE5IHNpZ25pbmc."
          "hgyY0il_MGCjP0JzlnLWG1PPOt7-09PGcvMg3AIbQR6dWbhijcNR4ki4iylGjg5BhVsPt9g7sVvpAr_MuM0KAg",
          "RFC 8037 A.4: jwcrypto writes the JWS jws_test.cpp reproduces")

    with tempfile.TemporaryDirectory() as work:
        # The signing key, made by jwcrypto; stepledger reads its PEM (PKCS #8, RFC 8410).
        key = jwk.JWK.generate(kty="OKP", crv="Ed25519")
        with open(os.path.join(work, "signer.pem"), "wb") as out:
            out.write(key.export_to_pem(private_key=True, password=None))
        with open(os.path.join(work, "signer.pub"), "wb") as out:
            out.write(key.export_to_pem())
        with open(os.path.join(work, "signer.jwk"), "w") as out:
            out.write(key.export_public() + "\n")
        public = jwk.JWK.from_json(key.export_public())

        run = stepledger(binary, ["select", os.path.join(fixture, "laptops_small.csv"), "--plan",
                                  os.path.join(fixture, "plan.json"), "--out", "out", "--sign-key", "signer.pem",
                                  "--quiet", "--threads", "1"], work)
        check(run.returncode == 0, "stepledger select --sign-key: " + run.stderr.strip())
        if run.returncode != 0:
            return
        with open(os.path.join(work, "out", "audit.json")) as audit_file:
            audit = json.load(audit_file)
        seal, signature = audit["seal"], audit["signature"]

        # -- 1. stepledger's signature, checked by jwcrypto ---------------------------------
        check(signature["signed"] == "seal", "signature.signed is \"seal\"")
        header_b64, payload_b64, _ = signature["jws"].split(".")
        check(payload_b64 == "", "the JWS payload part is empty (detached, RFC 7515 Appendix F)")
        header_text = b64url_decode(header_b64).decode("utf-8")
        header = json.loads(header_text)
        check(header == {"alg": "EdDSA", "kid": key.thumbprint()},
              "protected header is {alg: EdDSA, kid: jwcrypto's RFC 7638 thumbprint}: " + header_text)
        check(header_text == '{"alg":"EdDSA","kid":"%s"}' % key.thumbprint(),
              "protected header text is the documented fixed text")
        recorded = jwk.JWK(**signature["jwk"])
        check(signature["jwk"] == {"crv": "Ed25519", "kty": "OKP", "x": json.loads(key.export_public())["x"]},
              "signature.jwk is the public key {crv, kty, x}")
        check(recorded.thumbprint() == header["kid"], "the recorded JWK's thumbprint is the kid")
        check(jwcrypto_verifies(attached(signature["jws"], seal), public),
              "jwcrypto verifies stepledger's JWS with the seal as payload and the signer's key")
        check(jwcrypto_verifies(attached(signature["jws"], seal), recorded),
              "jwcrypto verifies it with the JWK the audit records")
        other_seal = ("0" if seal[0] != "0" else "1") + seal[1:]
        check(not jwcrypto_verifies(attached(signature["jws"], other_seal), public),
              "control: jwcrypto refuses it over another seal")
        other_key = jwk.JWK.generate(kty="OKP", crv="Ed25519")
        check(not jwcrypto_verifies(attached(signature["jws"], seal), other_key),
              "control: jwcrypto refuses it with another key")
        same = jws.JWS(seal.encode("ascii"))
        same.add_signature(key, alg=None, protected=header_text)
        compact = same.serialize(compact=True)
        check(compact == attached(signature["jws"], seal),
              "jwcrypto signing the same header over the same seal writes the same JWS")

        # -- 2. a jwcrypto JWS put into the audit, checked by stepledger verify ------------------
        def with_jwcrypto_signature(name, payload, protected, signing_key=key):
            token = jws.JWS(payload.encode("ascii"))
            token.add_signature(signing_key, alg=None, protected=protected)
            made_header, _, made_signature = token.serialize(compact=True).split(".")
            document = json.loads(json.dumps(audit))
            document["signature"] = {"signed": "seal", "jws": made_header + ".." + made_signature,
                                     "jwk": json.loads(signing_key.export_public())}
            with open(os.path.join(work, name), "w") as out:
                json.dump(document, out, indent=2, sort_keys=True)
            return name

        # json.dumps with its default separators: the header carries white space.
        spaced = json.dumps({"alg": "EdDSA", "kid": key.thumbprint()})
        made = with_jwcrypto_signature("jwcrypto.json", seal, spaced)
        for key_args, how in (([ "--public-key", "signer.jwk"], "the public key as a JWK"),
                              (["--public-key", "signer.pub"], "the public key as PEM"),
                              ([], "the key the audit records")):
            run = stepledger(binary, ["verify", made] + key_args, work)
            check(run.returncode == 0 and "signature: holds" in run.stdout,
                  "stepledger verify accepts jwcrypto's detached JWS over the seal with " + how + ": " +
                  (run.stdout + run.stderr).strip().replace("\n", " | "))

        # -- 3. controls -------------------------------------------------------------------------
        wrong = with_jwcrypto_signature("wrong_seal.json", other_seal, spaced)
        run = stepledger(binary, ["verify", wrong, "--public-key", "signer.jwk"], work)
        check(run.returncode == 1 and "signature does not verify against the public key signer.jwk" in run.stderr,
              "control: a jwcrypto JWS over another seal fails verify (exit 1): " + run.stderr.strip())
        no_kid = with_jwcrypto_signature("no_kid.json", seal, json.dumps({"alg": "EdDSA"}))
        run = stepledger(binary, ["verify", no_kid, "--public-key", "signer.jwk"], work)
        check(run.returncode == 1 and "protected header has no 'kid'" in run.stderr,
              "control: a jwcrypto JWS without kid fails verify (exit 1): " + run.stderr.strip())
        by_other = with_jwcrypto_signature("by_other.json", seal,
                                           json.dumps({"alg": "EdDSA", "kid": other_key.thumbprint()}), other_key)
        run = stepledger(binary, ["verify", by_other, "--public-key", "signer.jwk"], work)
        check(run.returncode == 1 and "another key signed the audit" in run.stderr,
              "control: a JWS by another key, its kid naming that key, fails verify (exit 1): " + run.stderr.strip())


if __name__ == "__main__":
    main()
    if failures:
        print(f"{len(failures)} check(s) failed", file=sys.stderr)
        sys.exit(1)
    print("every check holds")
