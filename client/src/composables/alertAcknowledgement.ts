// The acknowledge dialog of a list of drift alerts, as the alerts page and a score's drift timeline both use it.
import { ref } from 'vue';
import type { AlertView } from '@shared/drift';

/** How many alerts of a list nobody has acknowledged yet. */
export const openAlertCount = (alerts: readonly AlertView[]) => alerts.filter((a) => !a.acknowledgedAt).length;

/** Which alert the dialog is open for; once acknowledged, the list is stored again with the answer in its place. */
export function useAlertAcknowledgement(list: () => readonly AlertView[], store: (alerts: AlertView[]) => void) {
  const ackOpen = ref(false);
  const ackAlert = ref<AlertView | null>(null);
  function startAcknowledge(alert: AlertView) {
    ackAlert.value = alert;
    ackOpen.value = true;
  }
  function acknowledged(updated: AlertView) {
    store(list().map((a) => (a.id === updated.id ? updated : a)));
  }
  return { ackOpen, ackAlert, startAcknowledge, acknowledged };
}
