/*
 * Minimal start-up for running gainloom's check programs on an emulated
 * Cortex-M board (qemu-system-arm with semihosting).  Not for firmware:
 * the integrator's own start-up code runs the generated table there.
 *
 * Vector table with the initial stack pointer and reset handler; the reset
 * handler copies initialised data to RAM, zeroes the rest, turns the FPU on
 * where the build uses one, opens the semihosting console (newlib's rdimon)
 * and exits with main's status.  Any fault exits with status 99.
 */
#include <stdint.h>
#include <stdlib.h>

extern uint32_t target_data_load;
extern uint32_t target_data_start;
extern uint32_t target_data_end;
extern uint32_t target_bss_start;
extern uint32_t target_bss_end;
extern uint32_t target_stack_top;

extern int main(void);
extern void initialise_monitor_handles(void);

void target_reset(void);
void target_fault(void);
/* newlib's exit() runs the C library's fini hooks, which bare-metal start-up provides */
void _init(void);
void _fini(void);

__attribute__((section(".vectors"), used)) static const uintptr_t target_vectors[16] = {
    (uintptr_t)&target_stack_top,
    (uintptr_t)target_reset,
    (uintptr_t)target_fault, /* NMI */
    (uintptr_t)target_fault, /* HardFault */
    (uintptr_t)target_fault, /* MemManage */
    (uintptr_t)target_fault, /* BusFault */
    (uintptr_t)target_fault, /* UsageFault */
    0u, 0u, 0u, 0u,
    (uintptr_t)target_fault, /* SVCall */
    (uintptr_t)target_fault, /* DebugMonitor */
    0u,
    (uintptr_t)target_fault, /* PendSV */
    (uintptr_t)target_fault, /* SysTick */
};

void _init(void)
{
}

void _fini(void)
{
}

void target_fault(void)
{
    exit(99);
}

void target_reset(void)
{
    const uint32_t *source = &target_data_load;
    uint32_t *destination = &target_data_start;
    while (destination < &target_data_end) {
        *destination = *source;
        ++destination;
        ++source;
    }
    for (destination = &target_bss_start; destination < &target_bss_end; ++destination) {
        *destination = 0u;
    }
#if defined(__ARM_FP)
    /* full access to coprocessors 10 and 11 (the FPU) in CPACR (Armv7-M ARM, B3.2.20) */
    *(volatile uint32_t *)0xE000ED88u |= (0xFu << 20);
    __asm volatile("dsb\n\tisb" ::: "memory");
#endif
    initialise_monitor_handles();
    exit(main());
}
