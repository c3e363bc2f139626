/*
 * kcount: a QEMU TCG plugin that counts executed guest instructions between two markers.
 *
 * The benchmark firmware brackets each measured section with `mov r11, r11` (Thumb 0x46DB,
 * start) and `mov r10, r10` (Thumb 0x46D2, stop): no-ops the compiler never emits. Every
 * translated instruction gets an inline 64-bit add of 1 (exact even when a block is left
 * early), and the two markers also get a callback, registered before the add, that samples the
 * counter. A section's count is the number of instructions executed strictly between its
 * markers. One count per section is written, in order, to the file given as `out=PATH`
 * (default: stderr through qemu_plugin_outs).
 *
 * Debian ships no qemu-plugin.h, so the few declarations used are written out here, matching
 * the QEMU 7.2 plugin API (QEMU_PLUGIN_VERSION 1, include/qemu/qemu-plugin.h of QEMU 7.2).
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define QEMU_PLUGIN_EXPORT __attribute__((visibility("default")))
#define QEMU_PLUGIN_VERSION 1

typedef uint64_t qemu_plugin_id_t;
typedef struct qemu_info_t qemu_info_t; /* only passed through */
struct qemu_plugin_tb;
struct qemu_plugin_insn;

enum qemu_plugin_cb_flags { QEMU_PLUGIN_CB_NO_REGS, QEMU_PLUGIN_CB_R_REGS, QEMU_PLUGIN_CB_RW_REGS };
enum qemu_plugin_op { QEMU_PLUGIN_INLINE_ADD_U64 };

typedef void (*qemu_plugin_vcpu_tb_trans_cb_t)(qemu_plugin_id_t id, struct qemu_plugin_tb *tb);
typedef void (*qemu_plugin_vcpu_udata_cb_t)(unsigned int vcpu_index, void *userdata);
typedef void (*qemu_plugin_udata_cb_t)(qemu_plugin_id_t id, void *userdata);

void qemu_plugin_register_vcpu_tb_trans_cb(qemu_plugin_id_t id, qemu_plugin_vcpu_tb_trans_cb_t cb);
size_t qemu_plugin_tb_n_insns(const struct qemu_plugin_tb *tb);
struct qemu_plugin_insn *qemu_plugin_tb_get_insn(const struct qemu_plugin_tb *tb, size_t idx);
const void *qemu_plugin_insn_data(const struct qemu_plugin_insn *insn);
size_t qemu_plugin_insn_size(const struct qemu_plugin_insn *insn);
void qemu_plugin_register_vcpu_insn_exec_cb(struct qemu_plugin_insn *insn, qemu_plugin_vcpu_udata_cb_t cb,
                                            enum qemu_plugin_cb_flags flags, void *userdata);
void qemu_plugin_register_vcpu_insn_exec_inline(struct qemu_plugin_insn *insn, enum qemu_plugin_op op,
                                                void *ptr, uint64_t imm);
void qemu_plugin_register_atexit_cb(qemu_plugin_id_t id, qemu_plugin_udata_cb_t cb, void *userdata);
void qemu_plugin_outs(const char *string);

QEMU_PLUGIN_EXPORT int qemu_plugin_version = QEMU_PLUGIN_VERSION;

#define MARK_START 0x46DBu /* mov r11, r11 */
#define MARK_STOP 0x46D2u  /* mov r10, r10 */
#define MAX_SECTIONS 4096

static uint64_t executed;      /* every guest instruction (the guest is single-core) */
static uint64_t section_start; /* `executed` after the start marker */
static int open_section;
static uint64_t counts[MAX_SECTIONS];
static size_t n_counts;
static int unbalanced;
static const char *out_path;

static void on_start(unsigned int vcpu, void *udata) {
    (void)vcpu; (void)udata;
    if (open_section) unbalanced = 1;
    open_section = 1;
    section_start = executed + 1; /* the marker's own add runs after this callback */
}

static void on_stop(unsigned int vcpu, void *udata) {
    (void)vcpu; (void)udata;
    if (!open_section) { unbalanced = 1; return; }
    open_section = 0;
    if (n_counts < MAX_SECTIONS) counts[n_counts++] = executed - section_start;
    else unbalanced = 1;
}

static void on_translate(qemu_plugin_id_t id, struct qemu_plugin_tb *tb) {
    (void)id;
    size_t n = qemu_plugin_tb_n_insns(tb);
    for (size_t i = 0; i < n; i++) {
        struct qemu_plugin_insn *insn = qemu_plugin_tb_get_insn(tb, i);
        /* `>= 2`, not `== 2`: QEMU 7.2 reports a 16-bit Thumb instruction in the last halfword
         * before a page boundary as 4 bytes long (it took the next halfword for the second half
         * of a 32-bit one). 0x46xx is never the first halfword of a 32-bit instruction. */
        if (qemu_plugin_insn_size(insn) >= 2) {
            const uint8_t *b = qemu_plugin_insn_data(insn);
            unsigned op = (unsigned)b[0] | ((unsigned)b[1] << 8);
            if (op == MARK_START)
                qemu_plugin_register_vcpu_insn_exec_cb(insn, on_start, QEMU_PLUGIN_CB_NO_REGS, NULL);
            else if (op == MARK_STOP)
                qemu_plugin_register_vcpu_insn_exec_cb(insn, on_stop, QEMU_PLUGIN_CB_NO_REGS, NULL);
        }
        qemu_plugin_register_vcpu_insn_exec_inline(insn, QEMU_PLUGIN_INLINE_ADD_U64, &executed, 1);
    }
}

static void at_exit(qemu_plugin_id_t id, void *udata) {
    (void)id; (void)udata;
    FILE *f = out_path ? fopen(out_path, "w") : NULL;
    char line[64];
    for (size_t i = 0; i < n_counts; i++) {
        snprintf(line, sizeof line, "%llu\n", (unsigned long long)counts[i]);
        if (f) fputs(line, f); else qemu_plugin_outs(line);
    }
    snprintf(line, sizeof line, "total %llu%s\n", (unsigned long long)executed,
             unbalanced || open_section ? " unbalanced" : "");
    if (f) { fputs(line, f); fclose(f); } else qemu_plugin_outs(line);
}

QEMU_PLUGIN_EXPORT int qemu_plugin_install(qemu_plugin_id_t id, const qemu_info_t *info, int argc, char **argv) {
    (void)info;
    for (int i = 0; i < argc; i++)
        if (strncmp(argv[i], "out=", 4) == 0) out_path = argv[i] + 4;
    qemu_plugin_register_vcpu_tb_trans_cb(id, on_translate);
    qemu_plugin_register_atexit_cb(id, at_exit, NULL);
    return 0;
}
