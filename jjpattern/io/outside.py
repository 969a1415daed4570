"""Values an HDF5 file keeps in other files: refused, or (``allow_external``) read and hashed.

Three HDF5 features read other files: external links, external raw storage and
virtual datasets. Without the read setting ``allow_external`` each is refused
with a sentence before anything is read from it. With it, relative names are
found beside the input (as HDF5 does with the prefix ``${ORIGIN}``), every file
is hashed, and the input's hash becomes the hash of all of them together
(:func:`jjpattern.io.source.combine_digests`), each listed in the reading summary.
"""

from __future__ import annotations

import dataclasses
import hashlib
import os

from ..errors import InputError
from .limits import clip

_BLOCK = 1 << 20


def _sha256(path: str) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(_BLOCK), b""):
            digest.update(block)
    return digest.hexdigest()


def _text(name) -> str:
    return name.decode("utf-8", "replace") if isinstance(name, bytes) else str(name)


def _opened(group, name):
    """``group.get(name)`` without h5py's look at the file's mode (~50 us a dataset): the
    readers open files read-only."""
    import h5py

    try:
        oid = h5py.h5o.open(group.id, group._e(name), lapl=group._lapl)
    except KeyError:
        return None  # as get() says of a missing or dangling name
    if isinstance(oid, h5py.h5d.DatasetID):
        return h5py.Dataset(oid, readonly=True)
    if isinstance(oid, h5py.h5g.GroupID):
        return h5py.Group(oid)
    return h5py.Datatype(oid)


class Outside:
    """The other files one HDF5 input reaches, checked as they are met."""

    def __init__(self, source, settings):
        self.path = source.path
        self.digest = source.digest
        self.allowed = bool(getattr(settings, "allow_external", False))
        self.folder = os.path.dirname(os.path.abspath(source.path))
        self.files: dict[str, str] = {}

    def link(self, group, name, link=None) -> None:
        """Refuse (or note) an external link at ``name`` before it is followed."""
        import h5py

        if link is None:
            try:
                # The link's type first (a few us; h5py's link object costs ~20 us more).
                if group.id.links.get_info(group._e(name)).type != h5py.h5l.TYPE_EXTERNAL:
                    return
            except (KeyError, ValueError, RuntimeError):
                return  # no such link (HDF5 says RuntimeError): the caller says so
            link = group.get(name, getlink=True)
        if isinstance(link, h5py.ExternalLink):
            self._note(name, "an external link to", link.filename)

    def get(self, group, name):
        """``group.get(name)``; with ``allow_external`` a dataset is opened so that its other
        files are found beside the input (a dataset cannot be reopened so once open)."""
        import h5py

        if not self.allowed:
            return _opened(group, name)
        if group.get(name, getclass=True) is not h5py.Dataset:
            return group.get(name)
        access = h5py.h5p.create(h5py.h5p.DATASET_ACCESS)
        access.set_efile_prefix(b"${ORIGIN}")
        access.set_virtual_prefix(b"${ORIGIN}")
        return h5py.Dataset(h5py.h5d.open(group.id, name.encode(), access))

    def dataset(self, ds, plist=None):
        """The dataset once its other files are refused or noted and hashed (``plist``:
        its creation property list, when the caller already has it)."""
        import h5py

        if plist is None:
            plist = ds.id.get_create_plist()  # one look, not one per property (~20 us each)
        if not plist.get_external_count() and plist.get_layout() != h5py.h5d.VIRTUAL:
            return ds
        names = [_text(entry[0]) for entry in (ds.external or ())]
        if ds.is_virtual:
            names += [_text(vs.file_name) for vs in ds.virtual_sources()
                      if _text(vs.file_name) != "."]
        if not names:
            return ds
        what = "a virtual dataset reading" if ds.is_virtual else "stored in"
        for name in dict.fromkeys(names):
            self._note(ds.name, what, name)
        return ds

    def scan(self, handle) -> bool:
        """True when anything in the file refers to another file (metadata only)."""
        import h5py

        found = []
        visit_links = getattr(handle, "visititems_links", None)
        if visit_links is not None:
            visit_links(lambda name, link: found.append(name)
                        if isinstance(link, h5py.ExternalLink) else None)

        def visit(name, obj):
            if isinstance(obj, h5py.Dataset) and (obj.external or obj.is_virtual):
                found.append(name)

        handle.visititems(visit)
        return bool(found)

    def _note(self, name, what, filename) -> None:
        if not self.allowed:
            raise InputError(f"{self.path}: {clip(name)} is {what} another file, "
                             f"{clip(filename)}; reading outside the input is refused: pass "
                             "--allow-external (read setting allow_external) to read and hash it")
        found = self._resolve(filename)
        if found is None:
            raise InputError(f"{self.path}: {clip(name)} is {what} {clip(filename)}, which is "
                             "not found beside the input")
        if found not in self.files:
            self.files[found] = _sha256(found)

    def _resolve(self, filename: str) -> str | None:
        for candidate in (filename, os.path.join(self.folder, filename)):
            if os.path.isfile(candidate):
                return os.path.abspath(candidate)
        return None

    def sealed(self, data):
        """``data`` with a hash covering the other files read, which are listed."""
        if not self.files:
            return data
        from .source import combine_digests

        own = self.digest.compute()  # the other files are hashed as they are met: this one too
        listed = [{"path": p, "sha256": h} for p, h in sorted(self.files.items())]
        combined = combine_digests([(os.path.basename(self.path), own)]
                                   + [(p, h) for p, h in self.files.items()])
        if hasattr(data, "branches"):
            layout = {**data.layout, "external_files": listed, "file_sha256": own}
            return dataclasses.replace(data, sha256=combined, layout=layout)
        metadata = {**data.metadata, "external_files": ", ".join(
            f"{item['path']} (sha256 {item['sha256']})" for item in listed)}
        return dataclasses.replace(data, sha256=combined, metadata=metadata)
