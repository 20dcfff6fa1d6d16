"""What reproduces a run besides its config: the material data it used, the data files it read and
the versions of the libraries that computed it (``/provenance`` in result.h5; ``ampmodel rerun`` reads
it back)."""
from __future__ import annotations

import json

import numpy as np

from ampmodel._version import __version__
from ampmodel.description import Config
from ampmodel.materials.material import material_to_dict


def environment() -> dict[str, str]:
    """The versions of Python and of the libraries that compute a run, and the platform."""
    import platform

    import h5py
    import scipy
    return {"ampmodel": __version__, "python": platform.python_version(), "numpy": np.__version__,
            "scipy": scipy.__version__, "h5py": h5py.__version__, "platform": platform.platform()}


def provenance(config: Config) -> dict[str, str]:
    """What, with the root attributes ``config`` and ``software_version``, reproduces a run (README,
    "Reproducing a run"), each as JSON text (written as the text datasets ``/provenance/<name>``: they
    may exceed the 64 kB an HDF5 attribute holds).

    materials : medium name -> the material data it used (``materials.material_to_dict``: every value
        in SI, its sources, the spectrum)
    builtin_materials : the built-in materials the config named (``material = "..."`` or ``base``), as
        read from the material files, so that ``ampmodel rerun`` can use them again
    data_files : data files the config read (path as written -> their text)
    environment : versions of Python and the libraries, the platform
    config_source : the config file's path as given
    seed_from : a chained stage (seed.from): the earlier result file, its SHA-256, creation time and
        software version, the step taken
    """
    extra = {"seed_from": json.dumps(dict(config.seed.beam.origin))} if config.seed.beam is not None else {}
    return {**extra,
        "materials": json.dumps({m.name: material_to_dict(m.material) for m in config.media}),
        "builtin_materials": json.dumps({name: material_to_dict(m) for name, m in config.builtin_materials.items()}),
        "data_files": json.dumps(dict(config.data_files)),
        "environment": json.dumps(environment()),
        "config_source": json.dumps(config.source),
    }
