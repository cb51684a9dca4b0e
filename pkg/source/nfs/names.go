package nfs

// NumBytes is the number of fields on a mount's "bytes:" line
// (__NFSIOS_BYTESMAX in include/linux/nfs_iostat.h).
const NumBytes = 8

// NumEvents is the number of fields on a mount's "events:" line
// (__NFSIOS_COUNTSMAX in include/linux/nfs_iostat.h).
const NumEvents = 27

// Indexes into [Mount.Bytes], in the order of enum nfs_stat_bytecounters in
// include/linux/nfs_iostat.h.
const (
	BytesNormalRead  = iota // NFSIOS_NORMALREADBYTES: read(2) through the page cache
	BytesNormalWrite        // NFSIOS_NORMALWRITTENBYTES: write(2) through the page cache
	BytesDirectRead         // NFSIOS_DIRECTREADBYTES: O_DIRECT reads
	BytesDirectWrite        // NFSIOS_DIRECTWRITTENBYTES: O_DIRECT writes
	BytesServerRead         // NFSIOS_SERVERREADBYTES: READ payload received from the server
	BytesServerWrite        // NFSIOS_SERVERWRITTENBYTES: WRITE payload sent to the server
	BytesReadPages          // NFSIOS_READPAGES: pages read
	BytesWritePages         // NFSIOS_WRITEPAGES: pages written
)

// Indexes into [Mount.Events], in the order of enum nfs_stat_eventcounters
// in include/linux/nfs_iostat.h.
const (
	EventInodeRevalidate  = iota // NFSIOS_INODEREVALIDATE
	EventDentryRevalidate        // NFSIOS_DENTRYREVALIDATE
	EventDataInvalidate          // NFSIOS_DATAINVALIDATE
	EventAttrInvalidate          // NFSIOS_ATTRINVALIDATE
	EventOpen                    // NFSIOS_VFSOPEN
	EventLookup                  // NFSIOS_VFSLOOKUP
	EventAccess                  // NFSIOS_VFSACCESS
	EventUpdatePage              // NFSIOS_VFSUPDATEPAGE
	EventReadPage                // NFSIOS_VFSREADPAGE
	EventReadPages               // NFSIOS_VFSREADPAGES
	EventWritePage               // NFSIOS_VFSWRITEPAGE
	EventWritePages              // NFSIOS_VFSWRITEPAGES
	EventGetdents                // NFSIOS_VFSGETDENTS
	EventSetattr                 // NFSIOS_VFSSETATTR
	EventFlush                   // NFSIOS_VFSFLUSH
	EventFsync                   // NFSIOS_VFSFSYNC
	EventLock                    // NFSIOS_VFSLOCK
	EventRelease                 // NFSIOS_VFSRELEASE
	EventCongestionWait          // NFSIOS_CONGESTIONWAIT
	EventSetattrTruncate         // NFSIOS_SETATTRTRUNC
	EventExtendWrite             // NFSIOS_EXTENDWRITE
	EventSillyRename             // NFSIOS_SILLYRENAME
	EventShortRead               // NFSIOS_SHORTREAD
	EventShortWrite              // NFSIOS_SHORTWRITE
	EventJukeboxDelay            // NFSIOS_DELAY
	EventPNFSRead                // NFSIOS_PNFS_READ
	EventPNFSWrite               // NFSIOS_PNFS_WRITE
)

// bytesKeys are the raw counter names of the bytes fields, by index.
var bytesKeys = [NumBytes]string{
	BytesNormalRead:  "bytes.normal_read",
	BytesNormalWrite: "bytes.normal_write",
	BytesDirectRead:  "bytes.direct_read",
	BytesDirectWrite: "bytes.direct_write",
	BytesServerRead:  "bytes.server_read",
	BytesServerWrite: "bytes.server_write",
	BytesReadPages:   "bytes.read_pages",
	BytesWritePages:  "bytes.write_pages",
}

// eventKeys are the raw counter names of the events fields, by index.
var eventKeys = [NumEvents]string{
	EventInodeRevalidate:  "events.inode_revalidate",
	EventDentryRevalidate: "events.dentry_revalidate",
	EventDataInvalidate:   "events.data_invalidate",
	EventAttrInvalidate:   "events.attr_invalidate",
	EventOpen:             "events.open",
	EventLookup:           "events.lookup",
	EventAccess:           "events.access",
	EventUpdatePage:       "events.updatepage",
	EventReadPage:         "events.readpage",
	EventReadPages:        "events.readpages",
	EventWritePage:        "events.writepage",
	EventWritePages:       "events.writepages",
	EventGetdents:         "events.getdents",
	EventSetattr:          "events.setattr",
	EventFlush:            "events.flush",
	EventFsync:            "events.fsync",
	EventLock:             "events.lock",
	EventRelease:          "events.release",
	EventCongestionWait:   "events.congestion_wait",
	EventSetattrTruncate:  "events.setattr_truncate",
	EventExtendWrite:      "events.extend_write",
	EventSillyRename:      "events.silly_rename",
	EventShortRead:        "events.short_read",
	EventShortWrite:       "events.short_write",
	EventJukeboxDelay:     "events.jukebox_delay",
	EventPNFSRead:         "events.pnfs_read",
	EventPNFSWrite:        "events.pnfs_write",
}

// knownOps are the RPC procedure names the kernel prints in the per-op
// section: NFSv2 and NFSv3 (nfs_procedures and nfs3_procedures in
// fs/nfs/proc.c, fs/nfs/nfs3xdr.c) and NFSv4 (nfs4_procedures in
// fs/nfs/nfs4xdr.c). Other names parse too; these are only interned.
var knownOps = []string{
	// NFSv2 and v3
	"NULL", "GETATTR", "SETATTR", "ROOT", "LOOKUP", "ACCESS", "READLINK",
	"READ", "WRCACHE", "WRITE", "CREATE", "MKDIR", "SYMLINK", "MKNOD",
	"REMOVE", "RMDIR", "RENAME", "LINK", "READDIR", "READDIRPLUS", "STATFS",
	"FSSTAT", "FSINFO", "PATHCONF", "COMMIT",
	// NFSv4 (the names not already listed)
	"OPEN", "OPEN_CONFIRM", "OPEN_NOATTR", "OPEN_DOWNGRADE", "CLOSE", "RENEW",
	"SETCLIENTID", "SETCLIENTID_CONFIRM", "LOCK", "LOCKT", "LOCKU",
	"LOOKUP_ROOT", "SERVER_CAPS", "DELEGRETURN", "GETACL", "SETACL",
	"FS_LOCATIONS", "RELEASE_LOCKOWNER", "SECINFO", "FSID_PRESENT",
	"EXCHANGE_ID", "CREATE_SESSION", "DESTROY_SESSION", "SEQUENCE",
	"GET_LEASE_TIME", "RECLAIM_COMPLETE", "LAYOUTGET", "GETDEVICEINFO",
	"LAYOUTCOMMIT", "LAYOUTRETURN", "SECINFO_NO_NAME", "TEST_STATEID",
	"FREE_STATEID", "GETDEVICELIST", "BIND_CONN_TO_SESSION",
	"DESTROY_CLIENTID", "SEEK", "ALLOCATE", "DEALLOCATE", "LAYOUTSTATS",
	"CLONE", "COPY", "OFFLOAD_CANCEL", "LOOKUPP", "LAYOUTERROR",
	"COPY_NOTIFY", "GETXATTR", "SETXATTR", "LISTXATTRS", "REMOVEXATTR",
	"READ_PLUS",
}

// Lookup tables, filled once at package initialisation and only read after
// that, so that parsing a known name costs a map lookup, not an allocation.
var (
	opNames = func() map[string]string {
		m := make(map[string]string, len(knownOps))
		for _, n := range knownOps {
			m[n] = n
		}
		return m
	}()
	opKeys = func() map[string]string {
		m := make(map[string]string, len(knownOps))
		for _, n := range knownOps {
			m[n] = "op." + n
		}
		return m
	}()
)

// internOp returns b as a string, without allocating for known names.
func internOp(b []byte) string {
	if s, ok := opNames[string(b)]; ok {
		return s
	}
	return string(b)
}

// opKey returns the raw counter name "op.<name>".
func opKey(name string) string {
	if s, ok := opKeys[name]; ok {
		return s
	}
	return "op." + name
}
