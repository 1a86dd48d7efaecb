"""Receives sd_notify datagrams like systemd does, for test/service-notify.test.ts.

argv[1]: socket path, or @name for an abstract socket. Prints "READY" once bound, then one JSON
object per datagram: {"pid": sender pid from SCM_CREDENTIALS, "msg": text}. Exits after argv[2]
seconds of silence.
"""
import json, socket, struct, sys

name = sys.argv[1]
idle_s = float(sys.argv[2]) if len(sys.argv) > 2 else 5.0
addr = "\0" + name[1:] if name.startswith("@") else name
s = socket.socket(socket.AF_UNIX, socket.SOCK_DGRAM)
s.bind(addr)
s.setsockopt(socket.SOL_SOCKET, socket.SO_PASSCRED, 1)
s.settimeout(idle_s)
print("READY", flush=True)
ucred = struct.calcsize("3i")
while True:
    try:
        data, anc, _flags, _addr = s.recvmsg(4096, socket.CMSG_SPACE(ucred))
    except socket.timeout:
        break
    pid = None
    for level, kind, payload in anc:
        if level == socket.SOL_SOCKET and kind == socket.SCM_CREDENTIALS:
            pid = struct.unpack("3i", payload[:ucred])[0]
    print(json.dumps({"pid": pid, "msg": data.decode("utf-8")}), flush=True)
