// Rows of a list that open a record on click open it with the keyboard too: each row joins the tab order and Enter
// opens it. For Vuetify data tables: `:row-props="openOnEnter(open)"` next to `@click:row`.
export function openOnEnter<T>(open: (item: T) => unknown) {
  return ({ item }: { item: T }) => ({
    tabindex: 0,
    class: 'row-opens',
    onKeydown: (e: KeyboardEvent) => {
      // Only the row itself: Enter on a checkbox or button inside the row keeps its own meaning.
      if (e.key === 'Enter' && e.target === e.currentTarget) {
        e.preventDefault();
        void open(item);
      }
    },
  });
}
