#!/usr/bin/env python3
"""Writes the bad-input cases under tests/bad_input/json/, plan/ and audit/ (format: README.md).

The audit cases need real audits: this script runs the built stepledger on a small invented data
set (laptop listings) to make a base audit and a signed one, then writes each hostile variant —
truncated, edited, reordered, duplicated, re-sealed with the documented unkeyed algorithm
(audit/include/stepledger/audit/audit_document.h), re-signed (a JWS with detached payload over
the seal, audit/include/stepledger/audit/jws.h) — into its case file. Rerun it after
a change to the audit format or to what a run records, and review the diff:

    python3 tests/bad_input/make_json_cases.py build/cli/stepledger

Needs python3 and openssl. The two Ed25519 test keys come from fixed seeds (written into the
cases; they sign nothing else), and the base audit's fields that record time and the build are
set to fixed values and re-sealed, so that regenerating changes the cases only where what a run
records changed; the script checks that the tool verifies the base audit (with its data) and the
signed one (with its key) before it writes anything.
"""

import base64
import hashlib
import json
import os
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))

# ---- the documented seal (audit_document.h), as anyone can recompute it ----------------------


def canonical_number(value):
    """ECMAScript's shortest round-trip text of a number (RFC 8785); integers exactly."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if value == 0:
        return "0"
    text = repr(float(value))
    negative = text.startswith("-")
    text = text.lstrip("-")
    mantissa, _, exponent = text.partition("e")
    exponent = int(exponent or 0)
    whole, _, fraction = mantissa.partition(".")
    if fraction == "0":
        fraction = ""
    digits = (whole + fraction).lstrip("0")
    leading_zeros = len(whole + fraction) - len(digits)
    n = len(whole) + exponent - leading_zeros  # value = 0.digits x 10^n
    digits = digits.rstrip("0")
    k = len(digits)
    if k <= n <= 21:
        out = digits + "0" * (n - k)
    elif 0 < n <= 21:
        out = digits[:n] + "." + digits[n:]
    elif -6 < n <= 0:
        out = "0." + "0" * (-n) + digits
    else:
        out = digits[0] + ("." + digits[1:] if k > 1 else "") + "e" + ("+" if n - 1 >= 0 else "-") + str(abs(n - 1))
    return ("-" if negative else "") + out


def canonical(value):
    if value is None:
        return "null"
    if isinstance(value, (bool, int, float)):
        return canonical_number(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, list):
        return "[" + ",".join(canonical(item) for item in value) + "]"
    keys = sorted(value, key=lambda key: key.encode("utf-16-be"))
    return "{" + ",".join(json.dumps(key, ensure_ascii=False) + ":" + canonical(value[key]) for key in keys) + "}"


def sha256(text):
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def reseal(document):
    """Recomputes step digests, digests and seal; drops any signature (as an editor would)."""
    for key in ("seal", "signature", "digests"):
        document.pop(key, None)
    genesis = sha256(canonical({key: document.get(key) for key in ("format", "format_version", "plan", "data")}))
    previous = genesis
    steps = document["steps"] if isinstance(document.get("steps"), list) else []
    for step in steps:
        if isinstance(step, dict):
            step.pop("digest", None)
            step["digest"] = sha256(previous + canonical(step))
            previous = step["digest"]
    sections = {key: sha256(canonical(document[key])) for key in sorted(document)
                if key not in ("steps", "created_at", "duration_seconds")}
    document["digests"] = {"genesis": genesis, "route": previous, "step_count": len(steps), "sections": sections}
    document["seal"] = sha256(canonical({k: v for k, v in document.items() if k not in ("seal", "signature")}))
    return document


# ---- the invented data and plan --------------------------------------------------------------


def listings_csv(rows=24):
    """Invented refurbished-laptop listings: price from age (curved) and grade, with a little noise."""
    lines = ["age_months,grade,price"]
    grades = "ABC"
    for i in range(rows):
        age = 6 + (i * 7) % 54
        grade = grades[(i * 5) % 3]
        noise = ((i * 37) % 11 - 5) * 1.7
        price = 900 - 11.5 * age + 0.06 * age * age + {"A": 80, "B": 30, "C": 0}[grade] + noise
        lines.append(f"{age},{grade},{price:.2f}")
    return "\n".join(lines) + "\n"


PLAN = {
    "response": "price",
    "terms": [
        {"name": "age", "column": "age_months"},
        {"name": "age^2", "power": {"column": "age_months", "degree": 2}},
        {"name": "grade", "categorical": "grade", "baseline": "C"},
    ],
    "method": "forward",
    "criterion": "aic",
}

TO_PRICE = "listing_id,age_months,grade\nLT-9001,20,A\nLT-9002,40,B\n"


def run(binary, args, cwd):
    result = subprocess.run([binary] + args, cwd=cwd, capture_output=True, text=True)
    if result.returncode != 0:
        raise SystemExit(f"stepledger {' '.join(args)} failed: {result.stderr}")
    return result


def b64url(data):
    """RFC 7515 §2: base64url without padding."""
    return base64.urlsafe_b64encode(data).rstrip(b"=").decode("ascii")


def make_key(folder, name, seed_text, algorithm_prefix="302e020100300506032b657004220420"):
    """A key from a fixed seed (PKCS #8, RFC 8410; Ed25519 unless another algorithm's prefix is
    given), so that the cases do not change when regenerated: (private PEM, public PEM, public
    key as a JWK {crv, kty, x})."""
    seed = hashlib.sha256(seed_text.encode()).digest()
    der = os.path.join(folder, name + ".der")
    with open(der, "wb") as out:
        out.write(bytes.fromhex(algorithm_prefix) + seed)
    pem = os.path.join(folder, name + ".pem")
    subprocess.run(["openssl", "pkey", "-inform", "DER", "-in", der, "-out", pem], check=True, capture_output=True)
    public = subprocess.run(["openssl", "pkey", "-in", pem, "-pubout"], check=True, capture_output=True, text=True).stdout
    raw = subprocess.run(["openssl", "pkey", "-in", pem, "-pubout", "-outform", "DER"], check=True,
                         capture_output=True).stdout[-32:]
    with open(pem) as private:
        return private.read(), public, {"crv": "Ed25519", "kty": "OKP", "x": b64url(raw)}


def thumbprint(jwk):
    """RFC 7638: SHA-256 of the required members, sorted, no white space, in base64url."""
    members = '{"crv":"%s","kty":"%s","x":"%s"}' % (jwk["crv"], jwk["kty"], jwk["x"])
    return b64url(hashlib.sha256(members.encode("utf-8")).digest())


def ed25519(private_pem, message):
    with tempfile.TemporaryDirectory() as work:
        key = os.path.join(work, "key.pem")
        with open(key, "w") as out:
            out.write(private_pem)
        data = os.path.join(work, "message")
        with open(data, "wb") as out:
            out.write(message)
        return subprocess.run(["openssl", "pkeyutl", "-sign", "-inkey", key, "-rawin", "-in", data],
                              capture_output=True, check=True).stdout


def sign(document, private_pem, jwk, header=None):
    """Adds the signature as SealAuditDocument does: a JWS with detached payload (RFC 7515
    Appendix F), EdDSA, protected header {"alg":"EdDSA","kid":THUMBPRINT}, payload the seal's hex
    text; the public key as a JWK. header: another protected header text (hostile cases)."""
    header = header if header is not None else '{"alg":"EdDSA","kid":"%s"}' % thumbprint(jwk)
    signing_input = b64url(header.encode("utf-8")) + "." + b64url(document["seal"].encode("ascii"))
    signature = ed25519(private_pem, signing_input.encode("ascii"))
    document["signature"] = {"jwk": dict(jwk), "jws": b64url(header.encode("utf-8")) + ".." + b64url(signature),
                             "signed": "seal"}
    return document


def sign_in_version_3_shape(document, private_pem, jwk):
    """The signature of format_version 3 and earlier: Ed25519 over the seal's hex text, in hex."""
    value = ed25519(private_pem, document["seal"].encode("ascii")).hex()
    public_raw = base64.urlsafe_b64decode(jwk["x"] + "=").hex()
    document["signature"] = {"algorithm": "ed25519", "public_key": public_raw, "signed": "seal", "value": value}
    return document


def fixed(document):
    """The fields that record time and the build set to fixed values and the audit re-sealed, so
    that regenerating the cases changes them only where what a run records changed."""
    document["created_at"] = "2026-12-01T09:30:00Z"
    document["duration_seconds"] = 0.25
    document["tool"]["commit"] = "0000000"
    return reseal(document)


# ---- the cases -------------------------------------------------------------------------------


def compact(value):
    return json.dumps(value, ensure_ascii=False, separators=(",", ":"))


def write_case(folder, name, case):
    """One key a line, each file of `files` on a line of its own, values compact (audits are long)."""
    os.makedirs(os.path.join(HERE, folder), exist_ok=True)
    lines = []
    for key, value in case.items():
        if key == "files":
            entries = [" %s: %s" % (compact(file), compact(content)) for file, content in value.items()]
            lines.append('"files": {\n' + ",\n".join(entries) + "\n}")
        else:
            lines.append("%s: %s" % (compact(key), json.dumps(value, ensure_ascii=False)))
    with open(os.path.join(HERE, folder, name + ".json"), "w", encoding="utf-8") as out:
        out.write("{\n" + ",\n".join(lines) + "\n}\n")


def copy_of(document):
    return json.loads(json.dumps(document))


def main():
    if len(sys.argv) != 2:
        raise SystemExit(__doc__)
    binary = os.path.abspath(sys.argv[1])
    data = listings_csv()
    plan_text = json.dumps(PLAN, indent=2) + "\n"
    with tempfile.TemporaryDirectory() as work:
        with open(os.path.join(work, "data.csv"), "w") as out:
            out.write(data)
        with open(os.path.join(work, "plan.json"), "w") as out:
            out.write(plan_text)
        signer_private, signer_public, signer_jwk = make_key(work, "signer", "stepledger corpus: the signer")
        other_private, other_public, other_jwk = make_key(work, "other", "stepledger corpus: someone else")
        # A key of another type (X25519, RFC 8410's OID 1.3.101.110) from a fixed seed.
        _, x25519_public, _ = make_key(work, "x25519", "stepledger corpus: not a signing key",
                                       "302e020100300506032b656e04220420")
        run(binary, ["select", "data.csv", "--plan", "plan.json", "--out", "base", "--quiet"], work)
        with open(os.path.join(work, "base", "audit.json")) as audit:
            base = fixed(json.loads(audit.read()))
        signed = sign(copy_of(base), signer_private, signer_jwk)
        # The tool must accept both as they are: the base with its data, the signed one with its key.
        with open(os.path.join(work, "base.json"), "w") as out:
            out.write(json.dumps(base, indent=2, sort_keys=True) + "\n")
        with open(os.path.join(work, "signed.json"), "w") as out:
            out.write(json.dumps(signed, indent=2, sort_keys=True) + "\n")
        with open(os.path.join(work, "signer.pub"), "w") as out:
            out.write(signer_public)
        run(binary, ["verify", "base.json", "--data", "data.csv"], work)
        run(binary, ["verify", "signed.json", "--public-key", "signer.pub"], work)
        with open(os.path.join(work, "signer.jwk"), "w") as out:
            out.write(json.dumps(signer_jwk) + "\n")
        run(binary, ["verify", "signed.json", "--public-key", "signer.jwk"], work)
    base_text = json.dumps(base, indent=2, sort_keys=True) + "\n"
    fixture = "tests/bad_input/fixtures/json_cases_base_audit.json.txt"
    os.makedirs(os.path.join(HERE, "fixtures"), exist_ok=True)
    with open(os.path.join(HERE, "..", "..", fixture), "w") as out:
        out.write(base_text)

    def audit_case(about, item, args, exit_status, stderr, audit, extra_files=None, **more):
        files = {"audit.json": audit if isinstance(audit, str) else {"json": audit}}
        files.update(extra_files or {})
        case = {"about": about, "item": item, "args": args, "exit": exit_status, "files": files}
        if stderr:
            case["stderr"] = stderr
        case.update(more)
        return case

    # -- audit/: truncated, edited, reordered, duplicated, re-sealed, re-signed ------------------
    audit_cases = {}
    half = len(base_text) // 2
    line = base_text[:half].count("\n") + 1
    column = half - (base_text.rfind("\n", 0, half) + 1) + 1
    audit_cases["truncated_half"] = audit_case(
        "an audit cut in half: malformed JSON at the end, with its line and column", "11 audits truncated",
        ["verify", "audit.json"], 2, ["audit.json:%d:%d: malformed JSON" % (line, column)], base_text[:half])

    edited = copy_of(base)
    edited["model"]["coefficients"][1]["estimate"] += 1.0
    audit_cases["edited_coefficient"] = audit_case(
        "a coefficient edited, not re-sealed: verify names the section", "11 audits edited",
        ["verify", "audit.json"], 1, ["key 'model' does not match its digest"], edited)
    audit_cases["edited_coefficient_predict"] = audit_case(
        "a coefficient edited, not re-sealed: predict refuses to price with it", "11 audits edited",
        ["predict", "audit.json", "rows.csv"], 1, ["audit.json does not verify", "--allow-unverified"], edited,
        {"rows.csv": TO_PRICE})

    reordered = copy_of(base)
    reordered["steps"][1], reordered["steps"][2] = reordered["steps"][2], reordered["steps"][1]
    audit_cases["reordered_steps"] = audit_case(
        "two steps swapped: verify names the first step out of place", "11 audits reordered",
        ["verify", "audit.json"], 1, ["step 1 (recorded index 2)", "a step was moved or deleted"], reordered)

    duplicated_step = copy_of(base)
    duplicated_step["steps"].append(copy_of(duplicated_step["steps"][-1]))
    audit_cases["duplicated_step"] = audit_case(
        "the last step recorded twice: verify says a step was added", "11 audits duplicated",
        ["verify", "audit.json"], 1, ["step 5 (recorded index 4) [stop] digest does not match"], duplicated_step)

    fake_model = json.dumps({"terms": ["grade"], "coefficients": []})
    duplicated_key = base_text.replace('{\n  "cautions"', '{\n  "model": ' + fake_model + ',\n  "cautions"', 1)
    audit_cases["duplicated_model_key"] = audit_case(
        "a fake model written first under a repeated key 'model': refused, naming the key and where it is "
        "(the last one won before, so the fake was shown while the file verified)", "11.8 duplicate keys",
        ["verify", "audit.json"], 2, ["audit.json:", "key 'model': duplicate key"], duplicated_key,
        stderr_lacks=["internal error"])
    # The second top-level "model" (the real one, after the fake) is the repeated key.
    first = duplicated_key.index('\n  "model": ')
    dup_line = duplicated_key[:duplicated_key.index('\n  "model": ', first + 1)].count("\n") + 2
    audit_cases["duplicated_model_key"]["stderr"] = ["audit.json:%d:3: key 'model': duplicate key" % dup_line]
    audit_cases["duplicated_model_key_predict"] = audit_case(
        "a repeated key 'model': predict refuses the audit before pricing", "11.8 duplicate keys",
        ["predict", "audit.json", "rows.csv"], 2, ["audit.json:%d:3: key 'model': duplicate key" % dup_line],
        duplicated_key, {"rows.csv": TO_PRICE})
    nested_duplicate = base_text.replace('"seed": ', '"seed": 1, "seed": ', 1)
    second_seed = nested_duplicate.index('"seed": ', nested_duplicate.index('"seed": ') + 1)
    seed_line = nested_duplicate[:second_seed].count("\n") + 1
    seed_column = second_seed - nested_duplicate.rfind("\n", 0, second_seed)
    audit_cases["duplicated_key_in_plan_normalised"] = audit_case(
        "a key repeated deep inside the audit (plan.normalised.seed): refused, naming the key and where it is",
        "11.8 duplicate keys", ["report", "audit.json"], 2,
        ["audit.json:%d:%d: key 'plan.normalised.seed': duplicate key" % (seed_line, seed_column)], nested_duplicate)

    degree = copy_of(base)
    for term in degree["plan"]["normalised"]["terms"]:
        if "power" in term:
            term["power"]["degree"] = 3
    reseal(degree)
    degree_message = ("key 'plan.normalised.terms[1].power.degree' is 3 in the audit, 2 from plan.verbatim")
    audit_cases["resealed_normalised_degree"] = audit_case(
        "the power's degree edited in plan.normalised and the audit re-sealed: verify (without data) names it",
        "11.2 plan.normalised replayed", ["verify", "audit.json"], 1, [degree_message], degree)
    audit_cases["resealed_normalised_degree_with_data"] = audit_case(
        "the same edit: verify --data names it too (the replay normalises plan.verbatim and compares)",
        "11.2 plan.normalised replayed", ["verify", "audit.json", "--data", "data.csv"], 1, [degree_message], degree,
        {"data.csv": data})
    audit_cases["resealed_normalised_degree_predict"] = audit_case(
        "the same edit: predict refuses to price from a plan that nothing replays", "11.2 plan.normalised replayed",
        ["predict", "audit.json", "rows.csv"], 1, ["audit.json does not verify", degree_message], degree,
        {"rows.csv": TO_PRICE})

    resealed_model = copy_of(base)
    resealed_model["model"]["coefficients"][1]["estimate"] += 5.0
    reseal(resealed_model)
    audit_cases["resealed_coefficient_with_data"] = audit_case(
        "a coefficient edited and the audit re-sealed: only the replay on the data can tell", "11 audits re-sealed",
        ["verify", "audit.json", "--data", "data.csv"], 1, ["replay differs: key 'model.coefficients[1].estimate'"],
        resealed_model, {"data.csv": data})

    version = copy_of(base)
    version["format_version"] = 2 ** 64 - 1
    reseal(version)
    for command in ("report", "predict"):
        args = ["report", "audit.json"] if command == "report" else ["predict", "audit.json", "rows.csv"]
        audit_cases["resealed_format_version_2_64_" + command] = audit_case(
            "format_version 2^64 - 1, re-sealed: not read as -1 by " + command, "11.8 integers range-checked", args, 2,
            ["key 'format_version': 18446744073709551615 is newer than this tool reads (%d)" % base["format_version"]], version,
            {"rows.csv": TO_PRICE} if command == "predict" else None)

    threads = copy_of(base)
    threads["settings"]["threads"] = 100000
    reseal(threads)
    audit_cases["resealed_threads_100000_rerun"] = audit_case(
        "settings.threads 100000, re-sealed: rerun refuses the recorded setting instead of starting the threads",
        "11.8 settings.threads bounded", ["rerun", "audit.json", "data.csv", "--out", "out"], 2,
        ["audit.json: key 'settings.threads': expected an integer from 1 to 256, found 100000"], threads,
        {"data.csv": data})
    audit_cases["resealed_threads_100000_verify"] = audit_case(
        "settings.threads 100000, re-sealed: verify --data says the replay cannot run with it", "11.8 settings.threads bounded",
        ["verify", "audit.json", "--data", "data.csv"], 1,
        ["replay impossible: the recorded settings are unusable", "key 'settings.threads'"], threads, {"data.csv": data})
    confidence = copy_of(base)
    confidence["settings"]["confidence_level"] = 2
    reseal(confidence)
    audit_cases["resealed_confidence_level_2_rerun"] = audit_case(
        "settings.confidence_level 2, re-sealed: rerun names the key", "11.8 settings range-checked",
        ["rerun", "audit.json", "data.csv", "--out", "out"], 2,
        ["key 'settings.confidence_level': expected a number between 0 and 1"], confidence, {"data.csv": data})

    for name, section, key, value, expected in [
        ("intercept_text", "model", "intercept", "yes", "key 'model.intercept': expected true or false, found string"),
        ("leverage_line_text", "prediction", "max_unit_leverage_line", "x",
         "key 'prediction.max_unit_leverage_line': expected an integer >= 0"),
        ("refinement_passes_text", "model", "refinement_passes", "many",
         "key 'model.refinement_passes': expected an integer from 0 to 1000"),
        ("n_negative", "model", "n", -1, "key 'model.n': expected an integer >= 0, found -1"),
        ("k_2_64", "model", "k", 2 ** 64 - 1, "key 'model.k': expected an integer >= 0, found 18446744073709551615"),
    ]:
        typed = copy_of(base)
        typed[section][key] = value
        reseal(typed)
        audit_cases["resealed_wrong_type_" + name + "_predict"] = audit_case(
            "a sealed audit whose %s.%s is %s: predict names the key (was exit 3)" % (section, key, json.dumps(value)),
            "11.6 wrong-typed fields in sealed audits", ["predict", "audit.json", "rows.csv"], 2, [expected], typed,
            {"rows.csv": TO_PRICE})
    levels = copy_of(base)
    levels["data"]["columns"][2]["too_many_levels"] = "no"
    reseal(levels)
    audit_cases["resealed_wrong_type_too_many_levels_predict"] = audit_case(
        "a sealed audit whose data.columns[2].too_many_levels is a string: predict names the key", 
        "11.6 wrong-typed fields in sealed audits", ["predict", "audit.json", "rows.csv"], 2,
        ["key 'data.columns[2].too_many_levels': expected true or false, found string"], levels, {"rows.csv": TO_PRICE})

    # compare: wrong-typed sections in either audit.
    for name, edit, expected in [
        ("model_array", lambda d: d.__setitem__("model", []), "new.json: key 'model': expected an object, found array"),
        ("columns_object", lambda d: d["data"].__setitem__("columns", {"a": 1}),
         "new.json: key 'data.columns': expected an array, found object"),
        ("steps_object", lambda d: d.__setitem__("steps", {"a": 1}), "new.json: key 'steps': expected an array, found object"),
        ("coefficient_name_number", lambda d: d["model"]["coefficients"][0].__setitem__("name", 5),
         "new.json: key 'model.coefficients[0].name': expected a string, found number"),
        ("column_sd_text", lambda d: d["data"]["columns"][1].__setitem__("sd", "wide"),
         "new.json: key 'data.columns[1].sd': expected a number or null, found string"),
        ("recorded_prediction_number", lambda d: d.__setitem__("comparison", {"old_seal": base["seal"], "prediction": 7}),
         "new.json: key 'comparison.prediction': expected an object, found number"),
    ]:
        other = copy_of(base)
        edit(other)
        audit_cases["compare_wrong_type_" + name] = {
            "about": "compare with a new audit whose section has the wrong type: exit 2 naming the audit and the key (was exit 3)",
            "item": "11.6 wrong-typed sections in compare",
            "args": ["compare", "old.json", "new.json"], "exit": 2,
            "files": {"new.json": {"json": other}}, "copy": {"old.json": fixture},
            "stderr": [expected], "stderr_lines": 1}

    # re-signed: the recorded public key swapped for another (the signature is still the signer's).
    swapped = copy_of(signed)
    swapped["signature"]["jwk"] = dict(other_jwk)
    audit_cases["swapped_public_key_with_key"] = audit_case(
        "signature.jwk swapped for another key's, the signature left as the signer made it: with the "
        "signer's --public-key it no longer passes (neither seal nor JWS covers the recorded key)",
        "11.8 public key covered", ["verify", "audit.json", "--public-key", "signer.pub"], 1,
        ["key 'signature.jwk' is the key with thumbprint " + thumbprint(other_jwk)], swapped,
        {"signer.pub": signer_public})
    audit_cases["swapped_public_key_without_key"] = audit_case(
        "the same swap without --public-key: the recorded key is not the one the signed header's kid names",
        "11.8 public key covered", ["verify", "audit.json"], 1,
        ["key 'signature.jwk' has the thumbprint " + thumbprint(other_jwk) + " (RFC 7638), not the protected "
         "header's kid"], swapped)
    resigned = copy_of(signed)
    resigned["model"]["coefficients"][1]["estimate"] += 5.0
    reseal(resigned)
    # Re-signed by someone else: an editor with their own key signs the recomputed seal.
    sign(resigned, other_private, other_jwk)
    audit_cases["resigned_by_another_key"] = audit_case(
        "a coefficient edited, re-sealed and re-signed with another key: the signer's public key exposes it",
        "11 audits re-signed", ["verify", "audit.json", "--public-key", "signer.pub"], 1,
        ["protected header 'kid' is \"" + thumbprint(other_jwk)[:16] + "...\", not the thumbprint of the public "
         "key in signer.pub (" + thumbprint(signer_jwk) + "): another key signed the audit"],
        resigned, {"signer.pub": signer_public})
    audit_cases["resigned_by_another_key_control"] = audit_case(
        "control for the case above: without --public-key the re-signed file holds as a record (what the note warns of)",
        "11 audits re-signed", ["verify", "audit.json"], 0, [], resigned)
    # Re-signed by someone else who names the signer's key in kid: the signature itself fails.
    lying = copy_of(resigned)
    sign(lying, other_private, signer_jwk)
    audit_cases["resigned_naming_the_signers_key"] = audit_case(
        "re-signed with another key whose JWS names the signer's key (kid and jwk): the signature does not "
        "verify against the signer's public key", "11 audits re-signed",
        ["verify", "audit.json", "--public-key", "signer.pub"], 1,
        ["signature does not verify against the public key signer.pub"], lying, {"signer.pub": signer_public})
    # The signer's own key, with a kid naming someone else: the signed header says another key.
    wrong_kid = sign(copy_of(base), signer_private, signer_jwk,
                     '{"alg":"EdDSA","kid":"%s"}' % thumbprint(other_jwk))
    audit_cases["kid_not_the_signing_key"] = audit_case(
        "a JWS by the signer whose protected header's kid is another key's thumbprint: refused with the kid "
        "and the key's thumbprint", "JWS signature",
        ["verify", "audit.json", "--public-key", "signer.pub"], 1,
        ["key 'signature.jws': protected header 'kid' is \"" + thumbprint(other_jwk)[:16] + "...\", not the "
         "thumbprint of the public key in signer.pub (" + thumbprint(signer_jwk) + ")"],
        wrong_kid, {"signer.pub": signer_public})
    alg_none = copy_of(signed)
    alg_none["signature"]["jws"] = b64url(('{"alg":"none","kid":"%s"}' % thumbprint(signer_jwk)).encode()) + ".."
    audit_cases["jws_alg_none"] = audit_case(
        "an unsecured JWS (alg none, no signature): refused, naming the algorithm", "JWS signature",
        ["verify", "audit.json"], 1, ["key 'signature.jws': protected header 'alg' is \"none\""], alg_none)
    attached = copy_of(signed)
    header_part, _, signature_part = attached["signature"]["jws"].split(".")
    attached["signature"]["jws"] = header_part + "." + b64url(base["seal"].encode("ascii")) + "." + signature_part
    audit_cases["jws_with_payload_attached"] = audit_case(
        "the JWS with its payload part filled in: the audit's JWS has it detached, so it is refused",
        "JWS signature", ["verify", "audit.json", "--public-key", "signer.pub"], 1,
        ["key 'signature.jws' carries a payload part"], attached, {"signer.pub": signer_public})
    padded = copy_of(signed)
    padded["signature"]["jws"] += "=="
    audit_cases["jws_signature_padded"] = audit_case(
        "base64 padding on the JWS signature part: not base64url (RFC 7515 §2), named", "JWS signature",
        ["verify", "audit.json"], 1,
        ["key 'signature.jws' has a signature part that is not base64url without padding (RFC 7515 §2): '='"],
        padded)
    old_shape = sign_in_version_3_shape(copy_of(base), signer_private, signer_jwk)
    audit_cases["version_3_signature_in_version_4"] = audit_case(
        "a signature in the shape of format_version 3 in an audit of format_version 4: refused, naming both",
        "JWS signature", ["verify", "audit.json", "--public-key", "signer.pub"], 1,
        ["key 'signature' has the shape of format_version 3 and earlier"], old_shape, {"signer.pub": signer_public})
    # --public-key: a JWK, told from PEM by its content; what is wrong in it is named (exit 2).
    audit_cases["public_key_jwk"] = audit_case(
        "control: the signer's public key as a JWK file verifies the signed audit", "JWS signature",
        ["verify", "audit.json", "--public-key", "signer.jwk"], 0, [], signed,
        {"signer.jwk": json.dumps(signer_jwk) + "\n"})
    for name, edit, expected in [
        ("kty_rsa", {"kty": "RSA"}, "key file 'signer.jwk': key 'kty' is \"RSA\", expected \"OKP\""),
        ("crv_x25519", {"crv": "X25519"}, "key file 'signer.jwk': key 'crv' is \"X25519\", expected \"Ed25519\""),
        ("x_padded", {"x": signer_jwk["x"] + "="},
         "key file 'signer.jwk': key 'x' is not base64url without padding (RFC 7515 §2): '=' at character 44"),
        ("x_standard_base64", {"x": "+" + signer_jwk["x"][1:]},
         "key file 'signer.jwk': key 'x' is not base64url without padding (RFC 7515 §2): '+' at character 1"),
        ("x_short", {"x": signer_jwk["x"][:40]}, "key file 'signer.jwk': key 'x' decodes to 30 bytes"),
    ]:
        bad_jwk = dict(signer_jwk)
        bad_jwk.update(edit)
        audit_cases["public_key_jwk_" + name] = audit_case(
            "--public-key a JWK with " + json.dumps(edit) + ": exit 2 naming the file and the member", "JWS signature",
            ["verify", "audit.json", "--public-key", "signer.jwk"], 2, [expected], signed,
            {"signer.jwk": json.dumps(bad_jwk) + "\n"}, stderr_lines=1)
    audit_cases["public_key_pem_x25519"] = audit_case(
        "--public-key a PEM key of another type (X25519): exit 2 naming the file and the type", "JWS signature",
        ["verify", "audit.json", "--public-key", "other.pub"], 2,
        ["key file 'other.pub' holds an X25519 key, not an Ed25519 key"], signed, {"other.pub": x25519_public},
        stderr_lines=1)
    audit_cases["public_key_neither_pem_nor_jwk"] = audit_case(
        "--public-key a file of hex digits: exit 2 saying the file is neither PEM nor a JWK", "JWS signature",
        ["verify", "audit.json", "--public-key", "key.hex"], 2,
        ["key file 'key.hex' is neither PEM (-----BEGIN ...) nor a JWK"], signed,
        {"key.hex": base64.urlsafe_b64decode(signer_jwk["x"] + "=").hex() + "\n"}, stderr_lines=1)

    for name, case in audit_cases.items():
        write_case("audit", name, case)

    # -- json/: the reader's limits, numbers, text ---------------------------------------------
    deep_plan = [{"text": '{"response": "price", "terms": "all", "missing": '}, {"text": "[", "times": 100000},
                 {"text": "]", "times": 100000}, {"text": "}"}]
    deep_audit = [{"text": '{"format": "stepledger-audit", "format_version": 2,\n "cautions": ['},
                  {"text": "[", "times": 100000}, {"text": "]", "times": 100000}, {"text": "]}"}]
    json_cases = {
        "plan_nested_100000_deep": {
            "about": "a plan nested 100,000 deep: refused while parsing, naming the file, line and column (crashed before)",
            "item": "11.4 deep nesting", "args": ["select", "data.csv", "--plan", "plan.json", "--out", "out"], "exit": 2,
            "files": {"data.csv": data, "plan.json": deep_plan},
            "stderr": ["plan.json:1:113: nested deeper than 64 levels of arrays and objects"], "stderr_lines": 1},
        "plan_number_1e400": {
            "about": "1e400 in a plan: beyond a double, named with its line and column (was exit 3 without a place)",
            "item": "11.6 1e400", "args": ["select", "data.csv", "--plan", "plan.json", "--out", "out"], "exit": 2,
            "files": {"data.csv": data, "plan.json": '{"response": "price", "terms": "all",\n "entry_p": 1e400}'},
            "stderr": ["plan.json:2:13: number 1e400 is beyond the range of a double"], "stderr_lines": 1},
        "plan_number_400_digits": {
            "about": "an integer of 400 digits as the seed: beyond a double, named with its place",
            "item": "11.6 1e400", "args": ["select", "data.csv", "--plan", "plan.json"], "exit": 2,
            "files": {"data.csv": data, "plan.json": '{"response": "price", "terms": "all", "seed": ' + "9" * 400 + "}"},
            "stderr": ["plan.json:1:47: number 9999"], "stderr_lines": 1},
        "plan_duplicate_key": {
            "about": "a plan key written twice: refused, naming the key and where the second one is",
            "item": "11.8 duplicate keys", "args": ["select", "data.csv", "--plan", "plan.json"], "exit": 2,
            "files": {"data.csv": data, "plan.json": '{"response": "price",\n  "method": "forward",\n  "terms": "all",\n  "method": "backward"}'},
            "stderr": ["plan key 'method': duplicate key", "(plan.json:4:3)"], "stderr_lines": 1},
        "plan_not_utf8_in_string": {
            "about": "a byte that is not UTF-8 inside a plan string: malformed JSON with its place, the byte escaped",
            "item": "11.6 invalid UTF-8", "args": ["select", "data.csv", "--plan", "plan.json"], "exit": 2,
            "files": {"data.csv": data, "plan.json": [{"text": '{"response": "pri'}, {"hex": "ff"}, {"text": 'ce", "terms": "all"}'}]},
            "stderr": ["plan.json:1:18: malformed JSON", "\\xFF"], "stderr_lines": 1},
        "data_level_not_utf8_out": {
            "about": "a categorical level that is not UTF-8, with --out: refused at reading with the cell's place, nothing written "
                     "(was exit 3: the JSON writer threw)",
            "item": "11.6 invalid UTF-8", "args": ["select", "data.csv", "--response", "price", "--out", "out"], "exit": 2,
            "files": {"data.csv": [{"text": "price,age,grade\n100,1,A\n90,2,B\n80,3,"}, {"hex": "ff"},
                                   {"text": "\n70,4,A\n60,5,B\n50,6,A\n"}]},
            "stderr": ["data.csv:4:6: column 'grade' holds text that is not UTF-8 (byte 0xFF at byte 1 of the cell)"],
            "stderr_lines": 1},
        "data_level_not_utf8_json": {
            "about": "the same level with --json: refused with the cell's place (was exit 3)",
            "item": "11.6 invalid UTF-8", "args": ["select", "data.csv", "--response", "price", "--json"], "exit": 2,
            "files": {"data.csv": [{"text": "price,age,grade\n100,1,A\n90,2,B\n80,3,caf"}, {"hex": "e9"},
                                   {"text": "\n70,4,A\n60,5,B\n50,6,A\n"}]},
            "stderr": ["data.csv:4:6: column 'grade' holds text that is not UTF-8 (byte 0xE9 at byte 4 of the cell)"],
            "stderr_lines": 1},
        "data_level_not_utf8_profile_json": {
            "about": "profile --json of a column whose text is not UTF-8: refused with the cell's place (was exit 3)",
            "item": "11.6 invalid UTF-8", "args": ["profile", "data.csv", "--json"], "exit": 2,
            "files": {"data.csv": [{"text": "price,grade\n100,A\n90,"}, {"hex": "c3 28"}, {"text": "\n"}]},
            "stderr": ["data.csv:3:4: column 'grade' holds text that is not UTF-8 (byte 0xC3 at byte 1 of the cell)"],
            "stderr_lines": 1},
        "data_header_not_utf8": {
            "about": "a column name that is not UTF-8: refused with its place in the header",
            "item": "11.6 invalid UTF-8", "args": ["select", "data.csv", "--response", "price", "--out", "out"], "exit": 2,
            "files": {"data.csv": [{"text": "price,age,gr"}, {"hex": "e9"}, {"text": "de\n100,1,A\n90,2,B\n80,3,A\n70,4,B\n"}]},
            "stderr": ["data.csv:1:11: the name in header field 3 is not UTF-8 text (byte 0xE9 at byte 3 of the name)"],
            "stderr_lines": 1},
        "predict_json_id_not_utf8": {
            "about": "predict --json with an --id cell that is not UTF-8: refused with the cell's place, no output file",
            "item": "11.6 invalid UTF-8", "args": ["predict", "audit.json", "rows.csv", "--id", "listing_id", "--json",
                                                   "--out", "priced.json"], "exit": 2,
            "copy": {"audit.json": fixture},
            "files": {"rows.csv": [{"text": "listing_id,age_months,grade\nLT-"}, {"hex": "ff"},
                                   {"text": ",20,A\n"}]},
            "stderr": ["rows.csv:2:1: the --id column 'listing_id' holds text that is not UTF-8 (byte 0xFF at byte 4"],
            "stderr_lines": 1},
        "predict_json_level_not_utf8": {
            "about": "predict --json of a row whose level is not UTF-8: the row is not priced (unknown level) and the quote "
                     "of the cell shows U+FFFD for the bad byte (was exit 3)",
            "item": "11.6 invalid UTF-8", "args": ["predict", "audit.json", "rows.csv", "--json", "--quiet"], "exit": 0,
            "copy": {"audit.json": fixture},
            "files": {"rows.csv": [{"text": "listing_id,age_months,grade\nLT-1,20,"}, {"hex": "ff"},
                                   {"text": "\nLT-2,30,B\n"}]},
            "stdout": ["unknown-level", "\ufffd"]},
        "audit_nested_100000_deep_verify": {
            "about": "an audit with a section nested 100,000 deep: verify refuses it while parsing (crashed in the "
                     "canonical-JSON writer)", "item": "11.4 deep nesting", "args": ["verify", "audit.json"], "exit": 2,
            "files": {"audit.json": deep_audit},
            "stderr": ["audit.json:2:77: nested deeper than 64 levels", "(at cautions[0][0]"], "stderr_lines": 1},
        "audit_number_1e400_verify": {
            "about": "1e400 in an audit: beyond a double, named with its line and column (was exit 3)",
            "item": "11.6 1e400", "args": ["verify", "audit.json"], "exit": 2,
            "files": {"audit.json": '{"format": "stepledger-audit",\n  "format_version": 2,\n  "duration_seconds": 1e400}'},
            "stderr": ["audit.json:3:23: number 1e400 is beyond the range of a double"], "stderr_lines": 1},
    }
    json_cases["audit_400000_objects_in_an_array"] = {
        "about": "an audit whose steps are 400,000 small objects: read in linear time, then refused for what it lacks "
                 "(nlohmann's callback parser took about 100 s: n^2 in the objects of an array)",
        "item": "11.5 hangs", "args": ["predict", "audit.json", "rows.csv"], "exit": 2, "timeout_seconds": 30,
        "files": {"audit.json": [{"text": '{"format": "stepledger-audit", "format_version": 2, "steps": ['},
                                 {"text": '{"a": 1}, ', "times": 399999}, {"text": '{"a": 1}]}'}],
                  "rows.csv": TO_PRICE},
        "stderr": ["audit.json: key 'prediction': missing"], "stderr_lines": 1}
    for command, args in [("report", ["report", "audit.json"]), ("compare", ["compare", "audit.json", "audit.json"])]:
        case = copy_of(json_cases["audit_nested_100000_deep_verify"])
        case["about"] = case["about"].replace("verify refuses", command + " refuses")
        case["args"] = args
        if command == "compare":
            case["stderr_lines"] = 1
        json_cases["audit_nested_100000_deep_" + command] = case
    for name, case in json_cases.items():
        write_case("json", name, case)

    # -- plan/: wrong types, unknown keys, extreme numbers, deep nesting -----------------------
    def plan_case(about, item, plan, expected):
        return {"about": about, "item": item, "args": ["select", "data.csv", "--plan", "plan.json", "--out", "out"],
                "exit": 2, "files": {"data.csv": data, "plan.json": plan if isinstance(plan, str) else {"json": plan}},
                "stderr": expected, "stderr_lines": 1}

    def with_key(key, value):
        plan = copy_of(PLAN)
        plan[key] = value
        return plan

    plan_cases = {
        "wrong_type_response_number": plan_case("the response is a number", "11 plans with wrong types",
                                                with_key("response", 5), ["plan key 'response': expected a string, found 5"]),
        "wrong_type_terms_object": plan_case("terms is an object", "11 plans with wrong types", with_key("terms", {"a": 1}),
                                             ["plan key 'terms': expected an array of term objects or \"all\""]),
        "wrong_type_degree_text": plan_case(
            "a power's degree written as text", "11 plans with wrong types",
            dict(PLAN, terms=[{"name": "age2", "power": {"column": "age_months", "degree": "2"}}]),
            ["plan key 'terms[0].power.degree': expected an integer >= 2, found \"2\""]),
        "wrong_type_seed_float": plan_case("the seed written as 3.0", "11 plans with wrong types", with_key("seed", 3.0),
                                           ["plan key 'seed': expected an integer from 0 to 18446744073709551615 (2^64 - 1), found 3.0"]),
        "unknown_key_top": plan_case("an unknown top-level key", "11 plans with unknown keys", with_key("colour", "red"),
                                     ["plan key 'colour': unknown key"]),
        "unknown_key_in_term": plan_case(
            "an unknown key inside a term", "11 plans with unknown keys",
            dict(PLAN, terms=[{"name": "age", "column": "age_months", "scale": 2}]), ["plan key 'terms[0].scale': unknown key"]),
        "extreme_seed_1e400": plan_case("the seed is 1e400", "11 plans with extreme numbers",
                                        json.dumps(PLAN)[:-1] + ', "seed": 1e400}',
                                        ["number 1e400 is beyond the range of a double"]),
        "extreme_max_levels_2_64": plan_case(
            "max_levels 2^64 (one past the largest integer JSON readers keep exact)", "11 plans with extreme numbers",
            json.dumps(PLAN)[:-1] + ', "max_levels": 18446744073709551616}', ["plan key 'max_levels': expected an integer >= 2"]),
        "extreme_entry_p_underflow": plan_case("entry_p 1e-400 (reads as 0)", "11 plans with extreme numbers",
                                               json.dumps(PLAN)[:-1] + ', "entry_p": 1e-400}',
                                               ["plan key 'entry_p': expected a number in (0, 1), found 0.0"]),
        "extreme_folds_2_31": plan_case("folds 2^31", "11 plans with extreme numbers", with_key("folds", 2 ** 31),
                                        ["plan key 'folds': expected an integer from 2 to 100, found 2147483648"]),
        "deep_nesting_in_terms": plan_case(
            "a term nested 70 deep inside terms", "11.4 deep nesting",
            '{"response": "price",\n "terms": [' + "[" * 70 + "]" * 70 + "]}",
            ["plan.json:2:74: nested deeper than 64 levels of arrays and objects (at terms[0]"]),
        "duplicate_key_in_term": plan_case(
            "a term's name written twice", "11.8 duplicate keys",
            '{"response": "price", "terms": [{"name": "age", "column": "age_months", "name": "years"}]}',
            ["plan key 'terms[0].name': duplicate key", "(plan.json:1:73)"]),
    }
    # The validation keys (issue 12): every bad value exits 2 naming the key. The accepted edges
    # (2^64 - 1 as a seed, 2 and 100 folds) are unit tests (tests/io/plan_file_test.cpp).
    seed_rule = "expected an integer from 0 to 18446744073709551615 (2^64 - 1)"
    validation = "12 validation keys"
    plan_cases.update({
        "folds_1": plan_case("one fold", validation, with_key("folds", 1),
                             ["plan key 'folds': expected an integer from 2 to 100, found 1"]),
        "folds_101": plan_case("101 folds", validation, with_key("folds", 101),
                               ["plan key 'folds': expected an integer from 2 to 100, found 101"]),
        "folds_fraction": plan_case("folds 2.5", validation, with_key("folds", 2.5),
                                    ["plan key 'folds': expected an integer from 2 to 100, found 2.5"]),
        "seed_negative": plan_case("a negative seed", validation, with_key("seed", -1),
                                   ["plan key 'seed': " + seed_rule + ", found -1"]),
        "seed_text": plan_case("the seed as text", validation, with_key("seed", "42"),
                               ["plan key 'seed': " + seed_rule + ", found \"42\""]),
        "seed_fraction": plan_case("the seed 0.5", validation, with_key("seed", 0.5),
                                   ["plan key 'seed': " + seed_rule + ", found 0.5"]),
        "seed_exponent": plan_case("the seed written 1e3", validation, json.dumps(PLAN)[:-1] + ', "seed": 1e3}',
                                   ["plan key 'seed': " + seed_rule + ", found 1000.0"]),
        "seed_2_64": plan_case("the seed 2^64, one past the largest", validation,
                               json.dumps(PLAN)[:-1] + ', "seed": 18446744073709551616}',
                               ["plan key 'seed': " + seed_rule]),
        "holdout_fraction_0": plan_case("a holdout of fraction 0", validation, with_key("holdout", {"fraction": 0}),
                                        ["plan key 'holdout.fraction': expected a number strictly between 0 and 1, found 0"]),
        "holdout_fraction_1": plan_case("a holdout of fraction 1", validation, with_key("holdout", {"fraction": 1}),
                                        ["plan key 'holdout.fraction': expected a number strictly between 0 and 1, found 1"]),
        "holdout_fraction_text": plan_case(
            "a holdout fraction written as text", validation, with_key("holdout", {"fraction": "20%"}),
            ["plan key 'holdout.fraction': expected a number strictly between 0 and 1, found \"20%\""]),
        "holdout_not_object": plan_case("holdout given as a number", validation, with_key("holdout", 0.2),
                                        ["plan key 'holdout': expected an object, found 0.2"]),
        "holdout_unknown_key": plan_case("an unknown key in holdout", validation, with_key("holdout", {"share": 0.2}),
                                         ["plan key 'holdout.share': unknown key; the keys here are fraction, seed"]),
        "holdout_seed_negative": plan_case("a negative holdout seed", validation, with_key("holdout", {"seed": -7}),
                                           ["plan key 'holdout.seed': " + seed_rule + ", found -7"]),
        "bootstrap_replicates_0": plan_case(
            "no bootstrap replicates", validation, with_key("bootstrap", {"replicates": 0}),
            ["plan key 'bootstrap.replicates': expected an integer from 1 to 100000, found 0"]),
        "bootstrap_replicates_100001": plan_case(
            "100,001 bootstrap replicates", validation, with_key("bootstrap", {"replicates": 100001}),
            ["plan key 'bootstrap.replicates': expected an integer from 1 to 100000, found 100001"]),
        "bootstrap_unknown_key": plan_case(
            "an unknown key in bootstrap", validation, with_key("bootstrap", {"replicates": 10, "samples": 10}),
            ["plan key 'bootstrap.samples': unknown key; the keys here are replicates, seed"]),
        "bootstrap_seed_text": plan_case("the bootstrap seed as text", validation, with_key("bootstrap", {"seed": "eleven"}),
                                         ["plan key 'bootstrap.seed': " + seed_rule + ", found \"eleven\""]),
    })
    # All subsets (issue 13): the tolerance's range, and a hopeless worst case refused before any
    # pass, saying how to go on. 61 terms over one column: the refusal comes before the data.
    subsets = "13 all subsets"
    tolerance_rule = "expected a number from 0 up to but not including 1"
    wide = dict(PLAN, method="all-subsets",
                terms=[{"name": "t%d" % i, "column": "age_months"} for i in range(61)])
    plan_cases.update({
        "subset_tolerance_1": plan_case("a subset tolerance of 1", subsets, with_key("subset_tolerance", 1),
                                        ["plan key 'subset_tolerance': " + tolerance_rule + ", found 1"]),
        "subset_tolerance_negative": plan_case(
            "a negative subset tolerance", subsets, with_key("subset_tolerance", -0.01),
            ["plan key 'subset_tolerance': " + tolerance_rule + ", found -0.01"]),
        "subset_tolerance_percent_text": plan_case(
            "a subset tolerance written as a percentage", subsets, with_key("subset_tolerance", "1%"),
            ["plan key 'subset_tolerance': " + tolerance_rule + ", found \"1%\""]),
        "all_subsets_61_candidates": plan_case(
            "all subsets over 61 candidate terms", subsets, wide,
            ["plan key 'method': all-subsets over 61 candidate terms (61 terms, 0 kept, 0 never) could have to read "
             "2^61.0 subsets; it takes plans of at most 2^50.0: set \"max_terms\" to at most ",
             "\"method\": \"stepwise\""]),
    })
    for name, case in plan_cases.items():
        write_case("plan", name, case)
    print("wrote %d audit, %d json and %d plan cases" % (len(audit_cases), len(json_cases), len(plan_cases)))


if __name__ == "__main__":
    main()
