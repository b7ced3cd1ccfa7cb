"""A tiny DICOM Upper Layer client for sending what storescu refuses to send.

storescu parses every file before it sends it, so it cannot deliver a
C-STORE whose data set is garbage. This module speaks the protocol itself:
A-ASSOCIATE-RQ, P-DATA-TF with a C-STORE-RQ command and arbitrary data set
bytes, A-RELEASE-RQ.

reference: DICOM PS3.8 section 9.3 (PDU structures) and PS3.7 section 9.3.1
(C-STORE command fields), Annex E (command dictionary).
"""

import socket
import struct

APPLICATION_CONTEXT = "1.2.840.10008.3.1.1.1"
EXPLICIT_LE = "1.2.840.10008.1.2.1"
IMPLEMENTATION_CLASS_UID = "2.25.118394021554683941003217620184093811205"


class AssociationRejected(Exception):
    pass


class AssociationAborted(Exception):
    pass


def _uid(text):
    data = text.encode("ascii")
    return data + (b"\0" if len(data) % 2 else b"")


def _item(item_type, payload):
    return struct.pack(">BBH", item_type, 0, len(payload)) + payload


def _element(group, element, value):
    """Implicit VR little endian element (the command set encoding)."""
    return struct.pack("<HHI", group, element, len(value)) + value


def _command(fields):
    body = b"".join(_element(0x0000, e, v) for e, v in sorted(fields.items()))
    return _element(0x0000, 0x0000, struct.pack("<I", len(body))) + body


def _parse_command(data):
    fields = {}
    offset = 0
    while offset + 8 <= len(data):
        group, element, length = struct.unpack_from("<HHI", data, offset)
        offset += 8
        fields[(group, element)] = data[offset:offset + length]
        offset += length
    return fields


class Association:
    def __init__(self, host, port, called_ae, calling_ae, sop_class_uid,
                 transfer_syntax=EXPLICIT_LE, timeout=15.0):
        self.sock = socket.create_connection((host, port), timeout=timeout)
        self.sop_class_uid = sop_class_uid
        self.pcid = 1
        self.max_pdu = 16384
        presentation = _item(
            0x20,
            struct.pack(">BBBB", self.pcid, 0, 0, 0)
            + _item(0x30, _uid(sop_class_uid).rstrip(b"\0"))
            + _item(0x40, transfer_syntax.encode("ascii")))
        user = _item(0x50, _item(0x51, struct.pack(">I", 16384))
                     + _item(0x52, IMPLEMENTATION_CLASS_UID.encode("ascii")))
        body = (struct.pack(">HH", 1, 0)
                + called_ae.ljust(16).encode("ascii")
                + calling_ae.ljust(16).encode("ascii") + b"\0" * 32
                + _item(0x10, APPLICATION_CONTEXT.encode("ascii"))
                + presentation + user)
        self._send_pdu(0x01, body)
        pdu_type, payload = self._read_pdu()
        if pdu_type == 0x03:
            raise AssociationRejected(payload.hex())
        if pdu_type != 0x02:
            raise AssociationAborted("unexpected PDU type %d" % pdu_type)
        accepted = False
        offset = 68
        while offset + 4 <= len(payload):
            item_type, _, length = struct.unpack_from(">BBH", payload, offset)
            item = payload[offset + 4:offset + 4 + length]
            if item_type == 0x21 and item[0] == self.pcid and item[2] == 0:
                accepted = True
            if item_type == 0x50:
                sub = 0
                while sub + 4 <= len(item):
                    st, _, sl = struct.unpack_from(">BBH", item, sub)
                    if st == 0x51:
                        self.max_pdu = struct.unpack_from(">I", item, sub + 4)[0] or 16384
                    sub += 4 + sl
            offset += 4 + length
        if not accepted:
            raise AssociationRejected("presentation context not accepted")

    def _send_pdu(self, pdu_type, body):
        self.sock.sendall(struct.pack(">BBI", pdu_type, 0, len(body)) + body)

    def _read_exact(self, n):
        data = b""
        while len(data) < n:
            chunk = self.sock.recv(n - len(data))
            if not chunk:
                raise AssociationAborted("connection closed by peer")
            data += chunk
        return data

    def _read_pdu(self):
        pdu_type, _, length = struct.unpack(">BBI", self._read_exact(6))
        payload = self._read_exact(length)
        if pdu_type == 0x07:
            raise AssociationAborted("A-ABORT " + payload.hex())
        return pdu_type, payload

    def _send_pdvs(self, data, is_command):
        chunk_size = max(1024, min(self.max_pdu, 16384) - 12)
        offset = 0
        while True:
            chunk = data[offset:offset + chunk_size]
            offset += len(chunk)
            last = offset >= len(data)
            header = (0x01 if is_command else 0x00) | (0x02 if last else 0x00)
            pdv = struct.pack(">IBB", len(chunk) + 2, self.pcid, header) + chunk
            self._send_pdu(0x04, pdv)
            if last:
                return

    def c_store(self, sop_instance_uid, dataset_bytes, message_id=1):
        """Sends one C-STORE-RQ; returns the response status (int)."""
        command = _command({
            0x0002: _uid(self.sop_class_uid),
            0x0100: struct.pack("<H", 0x0001),
            0x0110: struct.pack("<H", message_id),
            0x0700: struct.pack("<H", 0),
            0x0800: struct.pack("<H", 0x0000),
            0x1000: _uid(sop_instance_uid),
        })
        return self.exchange(command, dataset_bytes)

    def c_find_on_context(self, sop_class_uid, identifier_bytes, message_id=1):
        """Sends a C-FIND-RQ (PS3.7 9.3.2.1) on this association's one
        context, whatever its abstract syntax; returns the response status."""
        command = _command({
            0x0002: _uid(sop_class_uid),
            0x0100: struct.pack("<H", 0x0020),
            0x0110: struct.pack("<H", message_id),
            0x0700: struct.pack("<H", 0),
            0x0800: struct.pack("<H", 0x0000),
        })
        return self.exchange(command, identifier_bytes)

    def exchange(self, command, dataset_bytes):
        """Sends a command and its data set; returns the first response's
        status."""
        self._send_pdvs(command, True)
        self._send_pdvs(dataset_bytes, False)
        received = b""
        while True:
            pdu_type, payload = self._read_pdu()
            if pdu_type != 0x04:
                raise AssociationAborted("unexpected PDU type %d" % pdu_type)
            offset = 0
            done = False
            while offset + 6 <= len(payload):
                length, _, header = struct.unpack_from(">IBB", payload, offset)
                received += payload[offset + 6:offset + 4 + length]
                offset += 4 + length
                if header & 0x03 == 0x03:
                    done = True
            if done:
                break
        fields = _parse_command(received)
        return struct.unpack("<H", fields[(0x0000, 0x0900)])[0]

    def release(self):
        self._send_pdu(0x05, b"\0" * 4)
        try:
            self._read_pdu()
        finally:
            self.sock.close()

    def close(self):
        self.sock.close()


VERIFICATION = "1.2.840.10008.1.1"


def associate_request(called_ae, calling_ae, contexts):
    """A whole A-ASSOCIATE-RQ PDU (PS3.8 9.3.2) with the given presentation
    contexts: (id, abstract syntax bytes or None, [transfer syntax bytes])."""
    items = b""
    for pcid, abstract, transfers in contexts:
        body = struct.pack(">BBBB", pcid, 0, 0, 0)
        if abstract is not None:
            body += _item(0x30, abstract)
        for ts in transfers:
            body += _item(0x40, ts)
        items += _item(0x20, body)
    user = _item(0x50, _item(0x51, struct.pack(">I", 16384))
                 + _item(0x52, IMPLEMENTATION_CLASS_UID.encode("ascii")))
    body = (struct.pack(">HH", 1, 0)
            + called_ae.ljust(16).encode("ascii")
            + calling_ae.ljust(16).encode("ascii") + b"\0" * 32
            + _item(0x10, APPLICATION_CONTEXT.encode("ascii"))
            + items + user)
    return struct.pack(">BBI", 0x01, 0, len(body)) + body


def read_pdu(sock):
    """(type, payload) of the next PDU, or (None, b"") when the peer closed."""
    def exact(n):
        data = b""
        while len(data) < n:
            chunk = sock.recv(n - len(data))
            if not chunk:
                return None
            data += chunk
        return data
    head = exact(6)
    if head is None:
        return None, b""
    pdu_type, _, length = struct.unpack(">BBI", head)
    payload = exact(length)
    return pdu_type, payload if payload is not None else b""


def context_results(ac_payload):
    """{presentation context id: result} of an A-ASSOCIATE-AC payload
    (PS3.8 9.3.3.2: 0 acceptance, 3 abstract syntax not supported...)."""
    results = {}
    offset = 68
    while offset + 4 <= len(ac_payload):
        item_type, _, length = struct.unpack_from(">BBH", ac_payload, offset)
        if item_type == 0x21:
            results[ac_payload[offset + 4]] = ac_payload[offset + 6]
        offset += 4 + length
    return results
