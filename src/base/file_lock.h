/* Advisory locks on open files, shared by the atomic outputs and the scan
 * checkpoint (private to the library). */
#ifndef JEANSGROW_FILE_LOCK_H
#define JEANSGROW_FILE_LOCK_H

/* Take an exclusive advisory lock on the whole of `fd` (opened for
 * writing) without waiting. Returns 0 when taken, 1 when another open of
 * the file holds it (another process, or another open in this one), -1
 * with errno set on any other failure. The lock belongs to the open file:
 * it goes away when the last descriptor of that open is closed, or when
 * the process dies, however it dies. */
int jg__file_try_lock(int fd);

#endif
