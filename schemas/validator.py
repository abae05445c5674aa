"""schemas/validator.py -- a JSON Schema 2020-12 validator over feasgate's
schema files, for the test scripts (tests/api/apicommon.py,
tests/reference/test_schemas.py).

make_validator(start, documents): `documents` maps bare file names to parsed
schemas; each is registered under BASE + its name, so the files' references
to each other ("check-result.schema.json#/$defs/...") resolve locally and
nothing is ever fetched; the validator checks against documents[start] with
format checking on. Debian bookworm's jsonschema 4.10 has RefResolver;
newer releases use the `referencing` registry; both are handled.
"""
from jsonschema import Draft202012Validator, FormatChecker

# Never fetched: the schema files are registered under this base.
BASE = "file:///feasgate/schemas/"

try:  # jsonschema >= 4.18
    from referencing import Registry, Resource
    from referencing.jsonschema import DRAFT202012

    def make_validator(start, documents):
        registry = Registry().with_resources(
            (BASE + name,
             Resource.from_contents(doc, default_specification=DRAFT202012))
            for name, doc in documents.items())
        return Draft202012Validator({"$ref": BASE + start}, registry=registry,
                                    format_checker=FormatChecker())
except ImportError:  # Debian bookworm's 4.10
    from jsonschema import RefResolver

    def make_validator(start, documents):
        store = {BASE + name: doc for name, doc in documents.items()}
        schema = {"$ref": BASE + start}
        resolver = RefResolver(base_uri=BASE, referrer=schema, store=store)
        return Draft202012Validator(schema, resolver=resolver,
                                    format_checker=FormatChecker())
